import { createHash } from 'node:crypto';
import { z } from 'zod';
import { RELEASE_FORMAT, releaseSchema, weightsPathByHash, type Release, type ReleaseTask } from '../protocol/release.js';
import type { DeviceClass } from '../schema/device-class.js';
import type { InputIssue } from '../schema/issues.js';
import type { Model } from '../schema/model.js';
import type { Profile } from '../schema/profile.js';
import type { Check } from '../schema/report.js';
import type { Task } from '../schema/task.js';
import type { BlobStore } from '../store/blobs.js';
import { refuse, type Outcome } from '../schema/refusal.js';
import type { Store } from '../store/store.js';
import type { ReleaseRequest } from './request.js';

/**
 * Why a release cannot be built: a device class or profile revisions that are not stored, revisions that
 * cannot go into it (another class, an older class version, weights not uploaded, no estimate to ship),
 * or revisions whose checks failed with no override reason given.
 */
export type ReleaseRefusalCode = 'unknown-device-class' | 'revisions-not-stored' | 'revisions-unfit' | 'checks-failed';

/** The figures of a validation report a release ships as the prediction for each task. */
const predictionFiguresSchema = z.object({
  latency: z.object({ inferenceMs: z.number().nonnegative(), totalMs: z.number().nonnegative() }),
  energy: z.object({ inferenceMj: z.number().nonnegative(), totalMj: z.number().nonnegative() }),
});

/** Release ids: readable, and within the 64 characters of an id even for long device class ids. */
export function releaseIdFor(deviceClassId: string, version: number): string {
  const suffix = `-v${version}`;
  if (deviceClassId.length + suffix.length <= 64) return `${deviceClassId}${suffix}`;
  const tag = createHash('sha256').update(deviceClassId).digest('hex').slice(0, 8);
  return `${deviceClassId.slice(0, 64 - suffix.length - tag.length - 1)}-${tag}${suffix}`;
}

/**
 * How long a device may start applying a release after it was made (its signed expiry). A device that
 * finds an expired release keeps what it runs and reports the refusal; a re-issue gives it a fresh one.
 */
export const RELEASE_VALIDITY_DAYS = 90;

export interface BuildContext {
  store: Store;
  blobs: BlobStore;
  actor: string;
  at: string;
  /** Days until the release expires; RELEASE_VALIDITY_DAYS when absent. */
  validityDays?: number;
}

/** The signed expiry of a release made at `at`. */
export function expiryFor(at: string, validityDays = RELEASE_VALIDITY_DAYS): string {
  return new Date(Date.parse(at) + validityDays * 86_400_000).toISOString();
}

/**
 * Builds the release a request asks for from stored, immutable profile revisions. Refuses, with a code:
 * unknown references, revisions for another device class or validated against an older version of it,
 * weights not uploaded, and revisions whose checks failed (listing them) unless an override reason is
 * given, which the release then carries. Call inside the transaction that stores the release, so the
 * version number cannot be taken twice.
 */
export function buildRelease(request: ReleaseRequest, ctx: BuildContext): Outcome<Release, ReleaseRefusalCode> {
  const { store, blobs } = ctx;
  const deviceClass = store.documents.latest<DeviceClass>('device-class', request.deviceClassId);
  if (!deviceClass) {
    return refuse('unknown-device-class', 'unknown device class', [{ path: 'deviceClassId', message: `no device class '${request.deviceClassId}' is stored` }]);
  }
  const missing: InputIssue[] = [];
  const mismatched: InputIssue[] = [];
  const failing: Record<string, Check[]> = {};
  const tasks: Record<string, ReleaseTask> = {};

  for (const [name, ref] of Object.entries(request.tasks)) {
    const path = `tasks.${name}`;
    const rev = store.profiles.revision<Profile>(ref.profileId, ref.revision);
    if (!rev) {
      const exists = store.profiles.latest(ref.profileId) !== null;
      missing.push(
        exists
          ? { path: `${path}.revision`, message: `profile '${ref.profileId}' has no revision ${ref.revision}` }
          : { path: `${path}.profileId`, message: `no profile '${ref.profileId}' is stored` },
      );
      continue;
    }
    if (rev.profile.deviceClassId !== request.deviceClassId) {
      mismatched.push({ path, message: `profile '${ref.profileId}' revision ${ref.revision} is for device class '${rev.profile.deviceClassId}', not '${request.deviceClassId}'` });
      continue;
    }
    if (rev.refs.deviceClass.version !== deviceClass.version) {
      mismatched.push({
        path,
        message: `profile '${ref.profileId}' revision ${ref.revision} was validated against version ${rev.refs.deviceClass.version} of the device class; it is now at version ${deviceClass.version}: save a new revision`,
      });
      continue;
    }
    if (rev.status === 'fail') failing[name] = rev.report.checks.filter((ch) => ch.status === 'fail');
    const model = store.documents.version<Model>('model', rev.refs.model.id, rev.refs.model.version)!;
    const task = store.documents.version<Task>('task', rev.refs.task.id, rev.refs.task.version)!;
    if (blobs.sizeOf(model.document.sha256) === null) {
      mismatched.push({ path, message: `weights of model '${model.id}' version ${model.version} (${model.document.sha256}) are not uploaded` });
      continue;
    }
    const figures = predictionFiguresSchema.safeParse(rev.report.figures);
    if (!figures.success) {
      mismatched.push({ path, message: `the report of profile '${ref.profileId}' revision ${ref.revision} has no latency and energy estimate to ship` });
      continue;
    }
    tasks[name] = {
      profileId: ref.profileId,
      revision: ref.revision,
      camera: rev.profile.camera,
      memory: rev.profile.memory,
      model: {
        id: model.id,
        version: model.document.version,
        sha256: model.document.sha256,
        sizeBytes: model.document.sizeBytes,
        weightsPath: weightsPathByHash({ id: model.id, sha256: model.document.sha256 }),
      },
      frameRateHz: task.document.frameRateHz,
      predicted: {
        inferenceMs: figures.data.latency.inferenceMs,
        inferenceMj: figures.data.energy.inferenceMj,
        frameLatencyMs: figures.data.latency.totalMs,
        frameEnergyMj: figures.data.energy.totalMj,
      },
    };
  }
  if (missing.length > 0) return refuse('revisions-not-stored', 'the release refers to profile revisions that are not stored', missing);
  if (mismatched.length > 0) return refuse('revisions-unfit', 'some profile revisions cannot go into this release', mismatched);
  const failingNames = Object.keys(failing);
  if (failingNames.length > 0 && !request.override) {
    const issues = failingNames.flatMap((name) => failing[name]!.map((ch) => ({ path: `tasks.${name}`, message: `${ch.code}: ${ch.message}` })));
    return refuse('checks-failed', 'some profile revisions fail their checks; fix them, or give override.reason to release anyway', issues, { failingChecks: failing });
  }

  const version = store.releases.nextVersion(request.deviceClassId);
  const release: Release = {
    format: RELEASE_FORMAT,
    id: releaseIdFor(request.deviceClassId, version),
    version,
    deviceClassId: request.deviceClassId,
    deviceClass: deviceClass.document,
    createdAt: ctx.at,
    createdBy: ctx.actor,
    audience: { deviceClassId: request.deviceClassId, ...(request.deviceIds ? { deviceIds: request.deviceIds } : {}) },
    expiresAt: expiryFor(ctx.at, ctx.validityDays),
    applyPolicy: request.applyPolicy,
    defaultTask: request.defaultTask,
    tasks,
    ...(failingNames.length > 0 && request.override ? { override: { reason: request.override.reason, by: ctx.actor } } : {}),
  };
  // The protocol schema is the contract with devices: a release that does not fit it is a fault here, not input.
  return { ok: true, value: releaseSchema.parse(release) };
}
