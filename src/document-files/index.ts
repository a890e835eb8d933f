export { loadCatalog } from './load.js';
export type { LoadOptions } from './load.js';
export { DOCUMENT_EXTENSIONS, isDocumentFile, parseText, readDocumentFile, toDocument } from './parse-file.js';
export type { FileParseResult } from './parse-file.js';
export { describeCatalogIssue, withoutFile } from './describe-issue.js';
export { mergeCatalogs } from './merge.js';
export { findDocument, profilesOf, resolveProfile } from './resolve.js';
export type { Catalog, CatalogDocument, CatalogIssue, ResolvedProfile, ResolveResult } from './types.js';
