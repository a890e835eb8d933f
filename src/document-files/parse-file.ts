import { readFile } from 'node:fs/promises';
import { basename, extname } from 'node:path';
import { parse as parseYaml } from 'yaml';
import { documentKinds, idSchema, isDocumentKind, parseWith, documentSchemas } from '../schema/index.js';
import { jsonErrorPosition, type TextPosition } from './text-position.js';
import type { CatalogDocument, CatalogIssue } from './types.js';

/** File endings the catalog reads; anything else in a folder is left alone. */
export const DOCUMENT_EXTENSIONS = ['.json', '.yaml', '.yml'] as const;

export function isDocumentFile(file: string): boolean {
  return (DOCUMENT_EXTENSIONS as readonly string[]).includes(extname(file).toLowerCase());
}

export type FileParseResult = { ok: true; document: CatalogDocument } | { ok: false; issues: CatalogIssue[] };

/** Parse the text of a file (JSON, or YAML by ending) into a plain value, or one located issue. */
export function parseText(file: string, text: string): { ok: true; data: unknown } | { ok: false; issue: CatalogIssue } {
  const yaml = /\.ya?ml$/i.test(file);
  try {
    return { ok: true, data: yaml ? parseYaml(text) : JSON.parse(text) };
  } catch (e) {
    const at = yaml ? yamlErrorPosition(e) : jsonErrorPosition(text, e);
    // The yaml package appends " at line L, column C:" and a code excerpt; the place is carried in line/column.
    const reason = (e instanceof Error ? (e.message.split('\n')[0] ?? '') : String(e)).replace(/ at line \d+, column \d+:?$/, '');
    const issue: CatalogIssue = { file, path: '(root)', message: `not valid ${yaml ? 'YAML' : 'JSON'}: ${reason}` };
    return { ok: false, issue: at ? { ...issue, ...at } : issue };
  }
}

function yamlErrorPosition(e: unknown): TextPosition | undefined {
  const linePos = (e as { linePos?: Array<{ line: number; col: number }> }).linePos;
  return linePos?.[0] ? { line: linePos[0].line, column: linePos[0].col } : undefined;
}

/**
 * Turn parsed data into a document of its `kind`. With `expectedKind`, a missing `kind` is taken to be that
 * kind (so a bare network file can be costed) and a different one is refused.
 */
export function toDocument(file: string, data: unknown, expectedKind?: (typeof documentKinds)[number]): FileParseResult {
  if (data === null || typeof data !== 'object' || Array.isArray(data)) {
    return { ok: false, issues: [{ file, path: '(root)', message: 'must be one object (a document with a "kind")' }] };
  }
  const declared = (data as { kind?: unknown }).kind;
  const kind = declared === undefined ? expectedKind : declared;
  if (!isDocumentKind(kind)) {
    const message =
      declared === undefined
        ? `missing "kind": must be one of ${documentKinds.join(', ')}`
        : `unknown kind ${JSON.stringify(declared)}: must be one of ${documentKinds.join(', ')}`;
    return { ok: false, issues: [{ file, path: 'kind', message }] };
  }
  if (expectedKind && kind !== expectedKind) {
    return { ok: false, issues: [{ file, path: 'kind', message: `is "${kind}" but a ${expectedKind} document is needed here` }] };
  }
  const parsed = parseWith(documentSchemas[kind], data);
  if (!parsed.ok) return { ok: false, issues: parsed.issues.map((i) => ({ file, ...i })) };
  if (kind === 'network') {
    const network = parsed.value as CatalogDocument['value'] & { id?: string };
    // A network without an id is known by its file name (without the ending), when that is a valid id.
    const id = network.id ?? basename(file).replace(/\.(json|ya?ml)$/i, '');
    if (!idSchema.safeParse(id).success) {
      return { ok: false, issues: [{ file, path: 'id', message: `missing, and the file name "${id}" is not a valid id` }] };
    }
    return { ok: true, document: { kind, file, value: { ...network, id } } as CatalogDocument };
  }
  return { ok: true, document: { kind, file, value: parsed.value } as CatalogDocument };
}

/** Read and parse one document file; never throws, every problem comes back located. */
export async function readDocumentFile(file: string, expectedKind?: (typeof documentKinds)[number]): Promise<FileParseResult> {
  let text: string;
  try {
    text = await readFile(file, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    const reason = code === 'ENOENT' ? 'no such file' : code === 'EISDIR' ? 'is a folder, not a file' : `cannot be read (${code ?? String(e)})`;
    return { ok: false, issues: [{ file, path: '(root)', message: reason }] };
  }
  const data = parseText(file, text);
  if (!data.ok) return { ok: false, issues: [data.issue] };
  return toDocument(file, data.data, expectedKind);
}
