import type { Model } from '../schema/model.js';
import { refuse, type Outcome } from '../schema/refusal.js';
import type { BlobStore } from '../store/blobs.js';
import type { Store } from '../store/store.js';

/** Why uploaded weights were not kept: no such model, more bytes than allowed, or not the bytes the model declares. */
export type WeightsUploadRefusalCode = 'model-not-found' | 'weights-too-large' | 'weights-mismatch';

export interface WeightsUploadContext {
  store: Store;
  blobs: BlobStore;
  actor: string;
  /** When the upload is recorded; read after the bytes are in, as a long upload takes its time. */
  now: () => string;
  maxBytes: number;
}

export interface StoredWeights {
  modelId: string;
  version: number;
  sha256: string;
  sizeBytes: number;
}

/**
 * Stores the weights of a model's latest version, hash- and size-checked against what the model declares
 * (content-addressed, so the bytes land once), and records the upload in the audit log.
 */
export async function uploadWeights(
  modelId: string,
  chunks: AsyncIterable<Uint8Array>,
  ctx: WeightsUploadContext,
): Promise<Outcome<StoredWeights, WeightsUploadRefusalCode>> {
  const model = ctx.store.documents.latest<Model>('model', modelId);
  if (!model) return refuse('model-not-found', `model '${modelId}' not found`);
  const { sha256, sizeBytes } = model.document;
  const result = await ctx.blobs.put(chunks, { sha256, sizeBytes, maxBytes: ctx.maxBytes });
  if (!result.ok) {
    const code = result.reason === 'too-large' || result.reason === 'over-declared-size' ? 'weights-too-large' : 'weights-mismatch';
    return refuse(code, `weights refused for model '${modelId}' version ${model.version}`, [{ path: 'body', message: result.detail }]);
  }
  const at = ctx.now();
  ctx.store.transaction(() =>
    ctx.store.audit.record({ at, actor: ctx.actor, action: 'model.weights.upload', target: `model/${modelId}`, detail: { version: model.version, sha256, sizeBytes: result.sizeBytes } }),
  );
  return { ok: true, value: { modelId, version: model.version, sha256, sizeBytes: result.sizeBytes } };
}
