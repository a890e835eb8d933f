import type { RolloutDeviceRecord, RolloutRecord, RolloutRepository } from '../../store/rollouts.js';
import type { Store } from '../../store/store.js';
import { recordAssignments, sendAssignments, type AssignInput, type ParsedReleases, type RecordedAssignment } from './assign.js';
import type { ReleasePublisher } from '../../protocol/release.js';
import type { EventRangeReader } from '../../store/event-ranges.js';

export interface DispatchDeps {
  store: Store;
  /** Sends releases over the bus; without it assignments are recorded only. */
  publisher: ReleasePublisher | undefined;
  repo: RolloutRepository;
  ranges: EventRangeReader;
  /** How many assignments one transaction records. */
  batchSize: number;
  /** Sends the broker has not acknowledged yet above which recording waits: bounds what a large wave holds in memory. */
  maxSendsInFlight: number;
  /** True while this server may assign (it holds the leader lock); checked before every batch is recorded. */
  fence?: () => boolean;
  log: (line: string) => void;
  /** The time waits are counted in, in ms (the engine's scheduler: only differences count). */
  nowMs: () => number;
}

export interface AssignmentDispatcher {
  /**
   * Assigns a rollout's devices batch by batch: each batch's records in one transaction, then its sends,
   * started at once and not awaited; between batches the event loop turns, so the broker delivers the first
   * releases while later ones are recorded. Stops early when the rollout left `running` (or `rolling-back`).
   * Resolves once everything is recorded and sent off, with the ms it spent waiting rather than working and
   * how many devices failed their gate because they could not be assigned (e.g. no longer enrolled).
   */
  dispatch(r: RolloutRecord, devices: readonly RolloutDeviceRecord[], rollback: boolean, at: string): Promise<{ waitedMs: number; failed: number }>;
  /** Resolves when every send started so far has its outcome (acknowledged by the broker, or failed and logged). */
  settled(): Promise<void>;
}

class AlreadyDone extends Error {}

const nextTurn = () => new Promise<void>((resolve) => setImmediate(resolve));

/** Releases never change once stored; a long-running server keeps only the latest few parsed. */
const PARSED_RELEASES_KEPT = 16;

/**
 * Records rollout assignments durably and sends them: the rollout's mark that a device was assigned lands in
 * the same transaction as the assignment, and only moves a device out of 'waiting' (or a rollback's mark out
 * of null), so a device is never assigned twice by one rollout, whatever crashed when. A release is parsed
 * once and shared by all its sends, so the bus encodes its payload once.
 */
export function createAssignmentDispatcher(deps: DispatchDeps): AssignmentDispatcher {
  const { store, publisher, repo, ranges, log } = deps;
  const parsed: ParsedReleases = new Map();
  const sending = new Set<Promise<void>>();
  let sendsInFlight = 0;

  function inputsOf(r: RolloutRecord, batch: readonly RolloutDeviceRecord[], rollback: boolean, at: string): AssignInput[] {
    return batch.map((d) => ({
      deviceId: d.deviceId,
      releaseId: rollback ? (d.restoreReleaseId ?? d.previousReleaseId!) : r.releaseId,
      actor: rollback ? (r.rollbackBy ?? r.createdBy) : r.createdBy,
      cause: `${rollback ? 'rollback' : 'rollout'}:${r.id}`,
      at,
      withinTransaction: (a, before) => {
        const marked = rollback
          ? repo.markRollback(r.id, d.deviceId, 'assigned', a.id)
          : repo.markAssigned(r.id, d.deviceId, { assignmentId: a.id, previousReleaseId: before.releaseId, at, eventsAfterSeq: ranges.maxSeq(d.deviceId) });
        if (!marked) throw new AlreadyDone(`${d.deviceId} was already moved by rollout ${r.id}`);
      },
    }));
  }

  /** What could not be recorded is settled now: logged, or (for a rollout) the device fails its gate (true). */
  function settleUnrecorded(r: RolloutRecord, d: RolloutDeviceRecord, result: Exclude<RecordedAssignment, { ok: true }>, rollback: boolean, at: string): boolean {
    if (result.code === 'not-recorded') {
      if (!(result.error instanceof AlreadyDone)) log(`rollout ${r.id}: ${d.deviceId} not assigned: ${result.message}`);
      return false;
    }
    if (rollback) {
      log(`rollout ${r.id}: cannot restore ${d.deviceId}: ${result.message}`);
      return false;
    }
    repo.setDeviceStatus(r.id, d.deviceId, 'failed', result.message, at);
    return true;
  }

  function sendOff(r: RolloutRecord, recorded: RecordedAssignment[]) {
    const n = recorded.length;
    sendsInFlight += n;
    const done: Promise<void> = sendAssignments(publisher, recorded)
      .then((results) => {
        for (const result of results) {
          if (result.ok && result.publish.status === 'not-sent') log(`rollout ${r.id}: ${result.assignment.deviceId} assigned but not sent (${result.publish.reason})`);
        }
      })
      .finally(() => {
        sendsInFlight -= n;
        sending.delete(done);
      });
    sending.add(done);
  }

  function stillMoving(r: RolloutRecord, rollback: boolean): boolean {
    const now = repo.get(r.id);
    return now !== null && now.status === (rollback ? 'rolling-back' : 'running') && now.currentWave === r.currentWave;
  }

  return {
    dispatch: async function dispatch(r, devices, rollback, at) {
      let waitedMs = 0;
      let failed = 0;
      if (parsed.size > PARSED_RELEASES_KEPT) parsed.clear();
      for (let i = 0; i < devices.length; i += deps.batchSize) {
        // Fencing: a replica that lost the leader lock records nothing more; the one that took it carries on.
        if (deps.fence && !deps.fence()) return { waitedMs, failed };
        if (i > 0) {
          const waitStart = deps.nowMs();
          await nextTurn();
          while (sendsInFlight > deps.maxSendsInFlight && sending.size > 0) await Promise.race(sending);
          waitedMs += deps.nowMs() - waitStart;
          // An operator may have paused or aborted the rollout while the loop turned.
          if (!stillMoving(r, rollback)) return { waitedMs, failed };
        }
        const batch = devices.slice(i, i + deps.batchSize);
        const recorded = recordAssignments(store, inputsOf(r, batch, rollback, at), parsed);
        const toSend: RecordedAssignment[] = [];
        recorded.forEach((result, k) => {
          if (result.ok) toSend.push(result);
          else if (settleUnrecorded(r, batch[k]!, result, rollback, at)) failed += 1;
        });
        if (toSend.length > 0) sendOff(r, toSend);
      }
      return { waitedMs, failed };
    },
    settled: async function settled() {
      while (sending.size > 0) await Promise.all([...sending]);
    },
  };
}
