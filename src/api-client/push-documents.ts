import { createReadStream, existsSync, statSync } from 'node:fs';
import { Readable } from 'node:stream';
import type { CatalogDocument } from '../document-files/index.js';
import { canonicalJson } from '../protocol/canonical-json.js';
import { ApiError, type ApiClient } from './api-client.js';

/** Documents go to the server in dependency order: a profile names a task, a model and a device class. */
export const DOCUMENT_ORDER: readonly CatalogDocument['kind'][] = ['device-class', 'network', 'model', 'task', 'profile'];

const COLLECTION: Record<CatalogDocument['kind'], string> = {
  'device-class': 'device-classes',
  network: 'networks',
  model: 'models',
  task: 'tasks',
  profile: 'profiles',
};

export function inDependencyOrder(documents: readonly CatalogDocument[]): CatalogDocument[] {
  return [...documents].sort((a, b) => DOCUMENT_ORDER.indexOf(a.kind) - DOCUMENT_ORDER.indexOf(b.kind));
}

export interface PushOutcome {
  file: string;
  kind: string;
  id: string;
  result: 'created' | 'updated' | 'unchanged' | 'refused';
  /** The stored version (documents) or revision (profiles). */
  version?: number;
  /** A profile's validation status. */
  status?: string;
  issues?: Array<{ path: string; message: string }>;
  error?: string;
}

async function current(client: ApiClient, path: string): Promise<Record<string, unknown> | null> {
  try {
    return await client.json<Record<string, unknown>>('GET', path);
  } catch (e) {
    if (e instanceof ApiError && e.status === 404) return null;
    throw e;
  }
}

/**
 * Creates a document, saves a new version when the server holds a different one, or leaves an identical one
 * alone. A refusal is an outcome with the server's located issues; an unreachable server throws.
 */
export async function pushDocument(client: ApiClient, doc: CatalogDocument): Promise<PushOutcome> {
  const base = `/api/v1/${COLLECTION[doc.kind]}`;
  const id = doc.value.id;
  const path = `${base}/${encodeURIComponent(id)}`;
  const outcome = { file: doc.file, kind: doc.kind, id };
  try {
    const existing = await current(client, path);
    const stored = existing ? (doc.kind === 'profile' ? existing.profile : existing.document) : undefined;
    if (existing && canonicalJson(stored) === canonicalJson(doc.value)) {
      return {
        ...outcome,
        result: 'unchanged',
        version: Number(existing.revision ?? existing.version),
        ...(typeof existing.status === 'string' ? { status: existing.status } : {}),
      };
    }
    const saved = existing
      ? await client.json<Record<string, unknown>>('PUT', path, doc.value)
      : await client.json<Record<string, unknown>>('POST', base, doc.value);
    return {
      ...outcome,
      result: existing ? 'updated' : 'created',
      version: Number(saved.revision ?? saved.version),
      ...(typeof saved.status === 'string' ? { status: saved.status } : {}),
    };
  } catch (e) {
    if (!(e instanceof ApiError) || e.status === 0) throw e;
    return { ...outcome, result: 'refused', error: e.message, issues: e.issues };
  }
}

/**
 * Streams a model's weights file to the server unless it already has them; the server hashes what arrives
 * and refuses a mismatch with the model's declared sha256. Returns what was done, in words.
 */
export async function uploadWeightsFile(client: ApiClient, modelId: string, file: string): Promise<{ uploaded: boolean; note: string }> {
  const path = `/api/v1/models/${encodeURIComponent(modelId)}`;
  const model = await client.json<{ weights?: { uploaded: boolean } }>('GET', path);
  if (model.weights?.uploaded) return { uploaded: false, note: 'weights already on the server' };
  if (!existsSync(file)) return { uploaded: false, note: `no weights file ${file}` };
  const res = await client.raw('PUT', `${path}/weights`, {
    body: Readable.toWeb(createReadStream(file)) as unknown as ReadableStream<Uint8Array>,
    headers: { 'content-type': 'application/octet-stream', 'content-length': String(statSync(file).size) },
  });
  const body = (await res.json().catch(() => null)) as { error?: string; issues?: Array<{ path: string; message: string }> } | null;
  if (!res.ok) {
    throw new ApiError(res.status, `weights of ${modelId}: ${res.status} ${body?.error ?? ''} ${body?.issues?.[0]?.message ?? ''}`.trim(), body?.issues ?? [], body);
  }
  return { uploaded: true, note: `weights uploaded from ${file}` };
}
