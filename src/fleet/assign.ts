import { signedReleaseSchema, type SignedRelease } from '../protocol/release.js';
import type { AssignmentRecord } from '../store/devices.js';
import type { Store } from '../store/store.js';

/** Sends a signed release to one device (the bus implements it with a retained message on the device's release topic). */
export interface ReleasePublisher {
  publishRelease(deviceId: string, signed: SignedRelease): Promise<void>;
}

export interface AssignInput {
  deviceId: string;
  releaseId: string;
  actor: string;
  /** Why the assignment was made: "manual", or the rollout that made it (e.g. "rollout:<id>"). */
  cause: string;
  /** ISO time of the assignment; now when absent. */
  at?: string;
  /**
   * Runs inside the assignment's transaction with the new assignment row, so a caller's own bookkeeping
   * (a rollout marking its device assigned) lands together with it or not at all: if it throws, nothing
   * is recorded or sent and the error reaches the caller.
   */
  withinTransaction?: (assignment: AssignmentRecord) => void;
}

export type PublishOutcome = { status: 'sent' } | { status: 'not-sent'; reason: string };

export type AssignResult =
  | { ok: true; assignment: AssignmentRecord; release: SignedRelease; publish: PublishOutcome }
  | { ok: false; code: 'device-not-found' | 'release-not-found' | 'class-mismatch'; message: string };

/**
 * Records that a device should run a release (the device row, an assignment history row and an audit entry,
 * in one transaction), then sends the signed release through the publisher. The recorded assignment stands
 * even when sending fails: the outcome says so, and the release can be sent again. The device itself decides
 * when to apply it, following the release's apply policy.
 */
export async function assignRelease(store: Store, publisher: ReleasePublisher | undefined, input: AssignInput): Promise<AssignResult> {
  const at = input.at ?? new Date().toISOString();
  const device = store.devices.get(input.deviceId);
  if (!device) return { ok: false, code: 'device-not-found', message: `no device '${input.deviceId}' is enrolled` };
  const record = store.releases.get(input.releaseId);
  if (!record) return { ok: false, code: 'release-not-found', message: `no release '${input.releaseId}' is stored` };
  if (record.deviceClassId !== device.deviceClassId) {
    return {
      ok: false,
      code: 'class-mismatch',
      message: `release '${record.id}' is for device class '${record.deviceClassId}'; device '${device.id}' is a '${device.deviceClassId}'`,
    };
  }
  const signed = signedReleaseSchema.parse(record.signed);
  const assignment = store.transaction(() => {
    const a = store.devices.assign({ deviceId: device.id, releaseId: record.id, cause: input.cause, actor: input.actor, at });
    store.audit.record({
      at,
      actor: input.actor,
      action: 'device.assign',
      target: `device/${device.id}`,
      detail: { releaseId: record.id, version: record.version, cause: input.cause, previousReleaseId: device.assignedReleaseId },
    });
    input.withinTransaction?.(a);
    return a;
  });
  if (!publisher) return { ok: true, assignment, release: signed, publish: { status: 'not-sent', reason: 'no bus connected to this server' } };
  try {
    await publisher.publishRelease(device.id, signed);
    return { ok: true, assignment, release: signed, publish: { status: 'sent' } };
  } catch (e) {
    return { ok: true, assignment, release: signed, publish: { status: 'not-sent', reason: e instanceof Error ? e.message : String(e) } };
  }
}
