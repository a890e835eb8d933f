import { signedReleaseSchema, type SignedRelease } from '../protocol/release.js';
import type { AssignmentRecord, DeviceRecord } from '../store/devices.js';
import type { ReleaseRecord } from '../store/releases.js';
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

type Prepared =
  | { ok: true; input: AssignInput; at: string; device: DeviceRecord; record: ReleaseRecord; signed: SignedRelease }
  | Extract<AssignResult, { ok: false }>;

/** Looks up the device and the release and checks they fit; a batch parses each release once (`parsed`). */
function prepare(store: Store, input: AssignInput, parsed: Map<string, { record: ReleaseRecord; signed: SignedRelease }>): Prepared {
  const at = input.at ?? new Date().toISOString();
  const device = store.devices.get(input.deviceId);
  if (!device) return { ok: false, code: 'device-not-found', message: `no device '${input.deviceId}' is enrolled` };
  const known = parsed.get(input.releaseId);
  const record = known?.record ?? store.releases.get(input.releaseId);
  if (!record) return { ok: false, code: 'release-not-found', message: `no release '${input.releaseId}' is stored` };
  if (record.deviceClassId !== device.deviceClassId) {
    return {
      ok: false,
      code: 'class-mismatch',
      message: `release '${record.id}' is for device class '${record.deviceClassId}'; device '${device.id}' is a '${device.deviceClassId}'`,
    };
  }
  // Releases never change once stored, so one batch reads and checks each release once.
  const signed = known?.signed ?? signedReleaseSchema.parse(record.signed);
  if (!known) parsed.set(record.id, { record, signed });
  return { ok: true, input, at, device, record, signed };
}

/** The device row, the assignment history row, the audit entry and the caller's own bookkeeping. Call inside a transaction. */
function record(store: Store, p: Extract<Prepared, { ok: true }>): AssignmentRecord {
  const { input, at, device, record: release } = p;
  const a = store.devices.assign({ deviceId: device.id, releaseId: release.id, cause: input.cause, actor: input.actor, at });
  store.audit.record({
    at,
    actor: input.actor,
    action: 'device.assign',
    target: `device/${device.id}`,
    detail: { releaseId: release.id, version: release.version, cause: input.cause, previousReleaseId: device.assignedReleaseId },
  });
  input.withinTransaction?.(a);
  return a;
}

async function send(publisher: ReleasePublisher | undefined, deviceId: string, signed: SignedRelease): Promise<PublishOutcome> {
  if (!publisher) return { status: 'not-sent', reason: 'no bus connected to this server' };
  try {
    await publisher.publishRelease(deviceId, signed);
    return { status: 'sent' };
  } catch (e) {
    return { status: 'not-sent', reason: e instanceof Error ? e.message : String(e) };
  }
}

/**
 * Records that a device should run a release (the device row, an assignment history row and an audit entry,
 * in one transaction), then sends the signed release through the publisher. The recorded assignment stands
 * even when sending fails: the outcome says so, and the release can be sent again. The device itself decides
 * when to apply it, following the release's apply policy.
 */
export async function assignRelease(store: Store, publisher: ReleasePublisher | undefined, input: AssignInput): Promise<AssignResult> {
  const p = prepare(store, input, new Map());
  if (!p.ok) return p;
  const assignment = store.transaction(() => record(store, p));
  return { ok: true, assignment, release: p.signed, publish: await send(publisher, p.device.id, p.signed) };
}

/** One item of a batch whose `withinTransaction` threw: nothing of it was recorded or sent. */
export type NotRecorded = { ok: false; code: 'not-recorded'; message: string; error: unknown };

/**
 * Many assignments at once (a rollout's wave): every record in ONE transaction, each item in its own savepoint
 * so an item whose `withinTransaction` throws is left out alone; then, after the commit, every release is sent.
 * Results come in the order of the inputs.
 */
export async function assignReleases(store: Store, publisher: ReleasePublisher | undefined, inputs: readonly AssignInput[]): Promise<Array<AssignResult | NotRecorded>> {
  const parsed = new Map<string, { record: ReleaseRecord; signed: SignedRelease }>();
  const prepared = inputs.map((input) => prepare(store, input, parsed));
  const recorded = store.transaction(() =>
    prepared.map((p): { p: Prepared; assignment?: AssignmentRecord; failed?: NotRecorded } => {
      if (!p.ok) return { p };
      try {
        return { p, assignment: store.transaction(() => record(store, p)) };
      } catch (error) {
        return { p, failed: { ok: false, code: 'not-recorded', message: error instanceof Error ? error.message : String(error), error } };
      }
    }),
  );
  return Promise.all(
    recorded.map(async (r): Promise<AssignResult | NotRecorded> => {
      if (!r.p.ok) return r.p;
      if (r.failed) return r.failed;
      return { ok: true, assignment: r.assignment!, release: r.p.signed, publish: await send(publisher, r.p.device.id, r.p.signed) };
    }),
  );
}
