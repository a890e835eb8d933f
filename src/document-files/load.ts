import { readdir, stat } from 'node:fs/promises';
import { isAbsolute, join, relative, resolve } from 'node:path';
import { isDocumentFile, readDocumentFile } from './parse-file.js';
import type { Catalog, CatalogDocument, CatalogIssue } from './types.js';

export interface LoadOptions {
  /** Folder that relative paths start from, and that file names are shown relative to. */
  cwd?: string;
}

/** Folders never searched: hidden ones and installed packages. */
const SKIPPED_FOLDERS = new Set(['node_modules']);

async function collectFiles(absPath: string, explicit: boolean, shown: string, out: Map<string, string>, issues: CatalogIssue[]) {
  let info;
  try {
    info = await stat(absPath);
  } catch {
    issues.push({ file: shown, path: '(root)', message: 'no such file or folder' });
    return;
  }
  if (info.isDirectory()) {
    const entries = (await readdir(absPath, { withFileTypes: true })).sort((a, b) => a.name.localeCompare(b.name));
    for (const entry of entries) {
      if (entry.name.startsWith('.') || SKIPPED_FOLDERS.has(entry.name)) continue;
      const child = join(absPath, entry.name);
      if (entry.isDirectory()) await collectFiles(child, false, join(shown, entry.name), out, issues);
      else if (entry.isFile() && isDocumentFile(entry.name)) out.set(child, join(shown, entry.name));
    }
  } else if (explicit && !isDocumentFile(absPath)) {
    issues.push({ file: shown, path: '(root)', message: 'not a document file: name must end in .json, .yaml or .yml' });
  } else {
    out.set(absPath, shown);
  }
}

function shownName(cwd: string, absPath: string, given: string): string {
  const rel = relative(cwd, absPath);
  return rel && !rel.startsWith('..') && !isAbsolute(rel) ? rel : given;
}

/**
 * Read every document under the given files and folders (recursively; .json, .yaml, .yml), each file one
 * document with a `kind`. Bad files become located issues; loading carries on past them. A file reached
 * twice (through overlapping paths) is read once. Ids are unique per kind: a second document with the
 * same kind and id is refused.
 */
export async function loadCatalog(paths: string[], options: LoadOptions = {}): Promise<Catalog> {
  const cwd = options.cwd ?? process.cwd();
  const files = new Map<string, string>();
  const issues: CatalogIssue[] = [];
  for (const given of paths) {
    const abs = resolve(cwd, given);
    await collectFiles(abs, true, shownName(cwd, abs, given), files, issues);
  }
  const documents: CatalogDocument[] = [];
  const seen = new Map<string, string>();
  for (const [abs, shown] of files) {
    const result = await readDocumentFile(abs);
    if (!result.ok) {
      issues.push(...result.issues.map((i) => ({ ...i, file: shown })));
      continue;
    }
    const doc = { ...result.document, file: shown } as CatalogDocument;
    const key = `${doc.kind}\u0000${doc.value.id}`;
    const first = seen.get(key);
    if (first !== undefined) {
      issues.push({ file: shown, path: 'id', message: `duplicate ${doc.kind} id '${doc.value.id}' (already defined in ${first})` });
      continue;
    }
    seen.set(key, shown);
    documents.push(doc);
  }
  return { documents, issues };
}
