import type { Outcome } from '../schema/refusal.js';
import type { BlobStore } from '../store/blobs.js';
import type { ReleaseRecord } from '../store/releases.js';
import type { Store } from '../store/store.js';
import { buildRelease, type ReleaseRefusalCode } from './build.js';
import type { ReleaseRequest } from './request.js';
import type { Signer } from './signer.js';

export interface CreateReleaseContext {
  store: Store;
  blobs: BlobStore;
  signer: Signer;
  actor: string;
  at: string;
}

/**
 * Builds, signs and stores a release with its audit entry, in one transaction: the version number cannot be
 * taken twice, and a refusal leaves nothing written. The stored text is what devices and the API get from now on.
 */
export function createRelease(request: ReleaseRequest, ctx: CreateReleaseContext): Outcome<ReleaseRecord, ReleaseRefusalCode> {
  const { store, signer, actor, at } = ctx;
  return store.transaction(() => {
    const built = buildRelease(request, { store, blobs: ctx.blobs, actor, at });
    if (!built.ok) return built;
    const release = built.value;
    const signed = signer.sign(release);
    const stored = store.releases.insert({ id: release.id, deviceClassId: release.deviceClassId, version: release.version, createdAt: at, createdBy: actor, signed });
    store.audit.record({
      at,
      actor,
      action: 'release.create',
      target: `release/${release.id}`,
      detail: {
        version: release.version,
        deviceClassId: release.deviceClassId,
        tasks: Object.fromEntries(Object.entries(release.tasks).map(([n, t]) => [n, { profileId: t.profileId, revision: t.revision }])),
        keyId: signed.keyId,
        override: release.override ?? null,
      },
    });
    return { ok: true, value: stored };
  });
}
