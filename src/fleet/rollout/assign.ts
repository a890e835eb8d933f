import type { ReleasePublisher } from '../../protocol/release.js';
import { refuse, type Refusal } from '../../schema/refusal.js';
import type { AssignmentRecord, DeviceRecord } from '../../store/devices.js';
import type { ReleaseRecord } from '../../store/releases.js';
import type { Store } from '../../store/store.js';


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
   * is recorded or sent and the error reaches the caller. `before` holds the release the device was assigned
   * before this assignment (read with the device, so the caller needs no read of its own).
   */
  withinTransaction?: (assignment: AssignmentRecord, before: { releaseId: string | null }) => void;
}

export type PublishOutcome = { status: 'sent' } | { status: 'not-sent'; reason: string };

export type AssignResult =
  | { ok: true; assignment: AssignmentRecord; release: ReleaseRecord; publish: PublishOutcome }
  | Refusal<AssignRefusalCode>;

/** Why an assignment is refused: the device or the release is not stored, or the release is for another device class. */
export type AssignRefusalCode = 'device-not-found' | 'release-not-found' | 'class-mismatch';

type Prepared =
  | { ok: true; input: AssignInput; at: string; device: DeviceRecord; record: ReleaseRecord }
  | Extract<AssignResult, { ok: false }>;

/** Looks up the device and the release and checks they fit; each release is read once per batch (`parsed`). */
function prepare(store: Store, input: AssignInput, parsed: ParsedReleases): Prepared {
  const at = input.at ?? new Date().toISOString();
  const device = store.devices.get(input.deviceId);
  if (!device) return refuse('device-not-found', `device '${input.deviceId}' not found`, [{ path: 'deviceId', message: `no device '${input.deviceId}' is enrolled` }]);
  const record = parsed.get(input.releaseId) ?? store.releases.get(input.releaseId);
  if (!record) return refuse('release-not-found', 'unknown release', [{ path: 'releaseId', message: `no release '${input.releaseId}' is stored` }]);
  if (record.deviceClassId !== device.deviceClassId) {
    const message = `release '${record.id}' is for device class '${record.deviceClassId}'; device '${device.id}' is a '${device.deviceClassId}'`;
    return refuse('class-mismatch', message, [{ path: 'releaseId', message }]);
  }
  // Releases never change once stored, so one batch reads each release once.
  parsed.set(record.id, record);
  return { ok: true, input, at, device, record };
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
  input.withinTransaction?.(a, { releaseId: device.assignedReleaseId });
  return a;
}

async function send(publisher: ReleasePublisher | undefined, deviceId: string, release: ReleaseRecord): Promise<PublishOutcome> {
  if (!publisher) return { status: 'not-sent', reason: 'no bus connected to this server' };
  try {
    // The stored text, byte for byte, as it was signed.
    await publisher.publishRelease(deviceId, release);
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
  return { ok: true, assignment, release: p.record, publish: await send(publisher, p.device.id, p.record) };
}

/** One item of a batch whose `withinTransaction` threw: nothing of it was recorded or sent. */
export type NotRecorded = { ok: false; code: 'not-recorded'; message: string; error: unknown };

/** A recorded assignment waiting to be sent, or why an item was not recorded. */
export type RecordedAssignment =
  | { ok: true; assignment: AssignmentRecord; release: ReleaseRecord; deviceId: string }
  | Extract<AssignResult, { ok: false }>
  | NotRecorded;

/** Stored releases by id, kept by a caller across batches (a rollout's release is read once, not per batch). */
export type ParsedReleases = Map<string, ReleaseRecord>;

/**
 * The recording half of a batch: every record in ONE transaction, each item in its own savepoint so an item
 * whose `withinTransaction` throws is left out alone. Nothing is sent. Results come in the order of the inputs;
 * recorded items of one release share one stored release object (`parsed`, which the caller may keep).
 */
export function recordAssignments(store: Store, inputs: readonly AssignInput[], parsed: ParsedReleases = new Map()): RecordedAssignment[] {
  const prepared = inputs.map((input) => prepare(store, input, parsed));
  return store.transaction(() =>
    prepared.map((p): RecordedAssignment => {
      if (!p.ok) return p;
      const a = store.attempt(() => record(store, p));
      if (a.ok) return { ok: true, assignment: a.value, release: p.record, deviceId: p.device.id };
      return { ok: false, code: 'not-recorded', message: a.error instanceof Error ? a.error.message : String(a.error), error: a.error };
    }),
  );
}

/** The sending half: every recorded item's release is sent at once (not one after another); outcomes in input order. */
export function sendAssignments(publisher: ReleasePublisher | undefined, recorded: readonly RecordedAssignment[]): Promise<Array<AssignResult | NotRecorded>> {
  return Promise.all(
    recorded.map(async (r): Promise<AssignResult | NotRecorded> => {
      if (!r.ok) return r;
      return { ok: true, assignment: r.assignment, release: r.release, publish: await send(publisher, r.deviceId, r.release) };
    }),
  );
}

/**
 * Many assignments at once (a rollout's wave): every record in ONE transaction (recordAssignments), then,
 * after the commit, every release is sent (sendAssignments). Results come in the order of the inputs.
 */
export async function assignReleases(store: Store, publisher: ReleasePublisher | undefined, inputs: readonly AssignInput[]): Promise<Array<AssignResult | NotRecorded>> {
  return sendAssignments(publisher, recordAssignments(store, inputs));
}
