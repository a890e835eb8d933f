import type { Catalog } from './types.js';

/**
 * Combine two catalogs; the first wins. A document of the second is dropped when its file was already read
 * or when the first already has its kind and id; issues of files the first already reported are dropped.
 */
export function mergeCatalogs(first: Catalog, second: Catalog): Catalog {
  const files = new Set([...first.documents.map((d) => d.file), ...first.issues.map((i) => i.file)]);
  const ids = new Set(first.documents.map((d) => `${d.kind}\u0000${d.value.id}`));
  return {
    documents: [...first.documents, ...second.documents.filter((d) => !files.has(d.file) && !ids.has(`${d.kind}\u0000${d.value.id}`))],
    issues: [...first.issues, ...second.issues.filter((i) => !files.has(i.file))],
  };
}
