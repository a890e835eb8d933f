import type { Statement } from 'better-sqlite3';
import { signedReleaseSchema, type SignedRelease } from '../../protocol/release.js';
import type { AssignmentRecord, DeviceRecord } from '../../store/devices.js';
import type { ReleaseRecord } from '../../store/releases.js';
import type { Store } from '../../store/store.js';

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
   * is recorded or sent and the error reaches the caller. `before` holds the release the device was assigned
   * before this assignment (read with the device, so the caller needs no read of its own).
   */
  withinTransaction?: (assignment: AssignmentRecord, before: { releaseId: string | null }) => void;
}

export type PublishOutcome = { status: 'sent' } | { status: 'not-sent'; reason: string };

export type AssignResult =
  | { ok: true; assignment: AssignmentRecord; release: SignedRelease; publish: PublishOutcome }
  | { ok: false; code: 'device-not-found' | 'release-not-found' | 'class-mismatch'; message: string };

type Prepared =
  | { ok: true; input: AssignInput; at: string; device: DeviceRecord; record: ReleaseRecord; signed: SignedRelease }
  | Extract<AssignResult, { ok: false }>;

/** Looks up the device and the release and checks they fit; each release is parsed once (`parsed`). */
function prepare(store: Store, input: AssignInput, parsed: ParsedReleases): Prepared {
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
  input.withinTransaction?.(a, { releaseId: device.assignedReleaseId });
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

/** A recorded assignment waiting to be sent, or why an item was not recorded. */
export type RecordedAssignment =
  | { ok: true; assignment: AssignmentRecord; release: SignedRelease; deviceId: string }
  | Extract<AssignResult, { ok: false }>
  | NotRecorded;

/** Parsed releases by id, kept by a caller across batches (a rollout's release is parsed once, not per batch). */
export type ParsedReleases = Map<string, { record: ReleaseRecord; signed: SignedRelease }>;

/**
 * The recording half of a batch: every record in ONE transaction, each item in its own savepoint so an item
 * whose `withinTransaction` throws is left out alone. Nothing is sent. Results come in the order of the inputs;
 * recorded items of one release share one parsed signed release object (`parsed`, which the caller may keep).
 */
export function recordAssignments(store: Store, inputs: readonly AssignInput[], parsed: ParsedReleases = new Map()): RecordedAssignment[] {
  const prepared = inputs.map((input) => prepare(store, input, parsed));
  const item = savepointsOf(store.db);
  return store.transaction(() =>
    prepared.map((p): RecordedAssignment => {
      if (!p.ok) return p;
      item.begin.run();
      try {
        const assignment = record(store, p);
        item.release.run();
        return { ok: true, assignment, release: p.signed, deviceId: p.device.id };
      } catch (error) {
        // An error that made SQLite abandon the whole transaction leaves no savepoint to return to: the batch fails.
        if (!store.db.inTransaction) throw error;
        item.rollback.run();
        item.release.run();
        return { ok: false, code: 'not-recorded', message: error instanceof Error ? error.message : String(error), error };
      }
    }),
  );
}

/** A batch item's savepoint statements, prepared once per database (cheaper than a nested transaction per item). */
const itemSavepoints = new WeakMap<Store['db'], { begin: Statement; release: Statement; rollback: Statement }>();

function savepointsOf(db: Store['db']) {
  let s = itemSavepoints.get(db);
  if (!s) {
    s = { begin: db.prepare('SAVEPOINT assign_item'), release: db.prepare('RELEASE assign_item'), rollback: db.prepare('ROLLBACK TO assign_item') };
    itemSavepoints.set(db, s);
  }
  return s;
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
