import { RELEASE_FORMAT, releaseSchema, weightsPathByHash, type Release } from '../protocol/release.js';
import { refuse, type Outcome } from '../schema/refusal.js';
import type { ReleaseRecord } from '../store/releases.js';
import type { BlobStore } from '../store/blobs.js';
import type { Store } from '../store/store.js';
import { expiryFor, releaseIdFor } from './build.js';
import type { Signer } from './signer.js';

export type ReissueRefusalCode = 'reissue-source-not-found' | 'weights-missing';
export type ReissueResult = Outcome<ReleaseRecord, ReissueRefusalCode>;

export interface ReissueContext {
  store: Store;
  blobs: BlobStore;
  signer: Signer;
  actor: string;
  at: string;
  validityDays?: number;
}

/**
 * Going back to an older release: a NEW release, with the next sequence number of its device class, a
 * fresh expiry and the old release's content (tasks, weights by hash, default task, apply policy,
 * audience), naming the release it re-issues. Devices refuse a lower sequence than they applied, so
 * this is the only way back. Signs and stores it with its audit entry in one transaction (joining the
 * caller's, when there is one: a rollback re-issues inside its own).
 */
export function reissueRelease(sourceId: string, ctx: ReissueContext): ReissueResult {
  return ctx.store.transaction(() => reissueIn(sourceId, ctx));
}

function reissueIn(sourceId: string, ctx: ReissueContext): ReissueResult {
  const record = ctx.store.releases.get(sourceId);
  if (!record) return refuse('reissue-source-not-found', `no release '${sourceId}' is stored`, [{ path: 'releaseId', message: sourceId }]);
  const source = record.parsed.release;
  const missing = Object.entries(source.tasks)
    .filter(([, t]) => ctx.blobs.sizeOf(t.model.sha256) === null)
    .map(([name, t]) => ({ path: `tasks.${name}.model`, message: `weights ${t.model.sha256} of model '${t.model.id}' are no longer stored` }));
  if (missing.length > 0) return refuse('weights-missing', `release '${sourceId}' cannot be re-issued: weights are missing`, missing);
  const version = ctx.store.releases.nextVersion(source.deviceClassId);
  const origin = source.reissueOf ?? { releaseId: source.id, version: source.version };
  const release: Release = releaseSchema.parse({
    format: RELEASE_FORMAT,
    id: releaseIdFor(source.deviceClassId, version),
    version,
    deviceClassId: source.deviceClassId,
    deviceClass: source.deviceClass,
    createdAt: ctx.at,
    createdBy: ctx.actor,
    audience: source.audience ?? { deviceClassId: source.deviceClassId },
    expiresAt: expiryFor(ctx.at, ctx.validityDays),
    reissueOf: origin,
    applyPolicy: source.applyPolicy,
    defaultTask: source.defaultTask,
    tasks: Object.fromEntries(
      Object.entries(source.tasks).map(([name, t]) => [name, { ...t, model: { ...t.model, weightsPath: weightsPathByHash(t.model) } }]),
    ),
    ...(source.override ? { override: source.override } : {}),
  });
  const signed = ctx.signer.sign(release);
  const stored = ctx.store.releases.insert({ id: release.id, deviceClassId: release.deviceClassId, version, createdAt: ctx.at, createdBy: ctx.actor, signed });
  ctx.store.audit.record({
    at: ctx.at,
    actor: ctx.actor,
    action: 'release.reissue',
    target: `release/${release.id}`,
    detail: { version, reissueOf: origin, from: source.id, keyId: signed.keyId },
  });
  return { ok: true, value: stored };
}
