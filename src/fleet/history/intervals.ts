import type { DeviceConnectionRepository } from '../../store/device-connections.js';
import type { AssignmentRecord } from '../../store/devices.js';
import type { Store } from '../../store/store.js';
import type { EventRangeReader, RangeEvent } from '../../store/event-ranges.js';
import type { HistoryInterval, IntervalCause } from '../../schema/history.js';
import { offlinePeriods, reportedRuns, withOffline } from './offline.js';

export type { HistoryInterval, IntervalCause } from '../../schema/history.js';

export interface HistoryWindow {
  fromMs: number;
  toMs: number;
  /** The present, to tell "still running" from "ran past the window's end". */
  nowMs: number;
}

/** Reads of a device's switch history; built once per store so prepared statements are reused. */
export interface HistoryReader {
  device(deviceId: string, window: HistoryWindow): HistoryInterval[];
  /** Every device's intervals of one task (filter on the task name). */
  task(task: string, window: HistoryWindow): HistoryInterval[];
  /** Every device's intervals running one release. */
  release(releaseId: string, window: HistoryWindow): HistoryInterval[];
}

/** Parses an assignment cause into the rollout it names, if any. */
export function rolloutOfCause(cause: string): string | undefined {
  const m = /^(?:rollout|rollback):(.+)$/.exec(cause);
  return m ? m[1] : undefined;
}

function causeOf(releaseId: string, startMs: number, assignments: readonly AssignmentRecord[]): IntervalCause {
  // The latest assignment of this release made before the switch; else the earliest one at all (device clock ahead).
  let chosen: AssignmentRecord | undefined;
  for (const a of assignments) {
    if (a.releaseId !== releaseId) continue;
    if (Date.parse(a.createdAt) <= startMs) chosen = a;
    else if (!chosen) {
      chosen = a;
      break;
    }
  }
  if (!chosen) return { releaseId };
  const rolloutId = rolloutOfCause(chosen.cause);
  return {
    releaseId,
    ...(rolloutId !== undefined ? { rolloutId } : {}),
    actor: chosen.actor,
    assignment: chosen.cause,
    assignedAt: chosen.createdAt,
  };
}

function intervalOf(deviceId: string, e: RangeEvent, start: string, end: string | null, assignments: readonly AssignmentRecord[]): HistoryInterval {
  const body = e.event as { toTask: string; profileId: string; profileRevision: number; releaseId: string; reason: string };
  return {
    kind: 'profile',
    deviceId,
    task: body.toTask,
    profileId: body.profileId,
    profileRevision: body.profileRevision,
    releaseId: body.releaseId,
    start,
    end,
    reason: body.reason,
    seq: e.seq,
    cause: causeOf(body.releaseId, Date.parse(start), assignments),
    reported: 'live',
  };
}

/**
 * Intervals from task-switched events: one runs from a switch to the next, so they are contiguous and never
 * overlap. Clipped to [from, to): the interval running at `from` starts at `from`, one running past `to`
 * ends at `to`, and the latest one has end null while the window reaches the present.
 */
export function deviceHistory(reader: EventRangeReader, assignments: readonly AssignmentRecord[], deviceId: string, w: HistoryWindow): HistoryInterval[] {
  const fromIso = new Date(w.fromMs).toISOString();
  const toIso = new Date(w.toMs).toISOString();
  const { events: switches, before, after } = reader.typedWindow(deviceId, 'task-switched', w.fromMs, w.toMs);
  const starts: Array<{ e: RangeEvent; start: string }> = [];
  // A switch exactly at `from` starts the window itself; the one before it then ran for no time inside it.
  if (before && (switches.length === 0 || Date.parse(switches[0]!.ts) > w.fromMs)) starts.push({ e: before, start: fromIso });
  for (const e of switches) starts.push({ e, start: e.ts });
  if (starts.length === 0) return [];
  const openEnd = after ? toIso : w.toMs >= w.nowMs ? null : toIso;
  return starts.map((s, i) => intervalOf(deviceId, s.e, s.start, i + 1 < starts.length ? starts[i + 1]!.start : openEnd, assignments));
}

/**
 * A device's whole history in a window: its profile intervals, cut where it was offline. A stretch its
 * delivered events account for stays on the profile (reported after the fact); the rest is offline.
 */
export function deviceHistoryWithOffline(
  reader: EventRangeReader,
  connections: Pick<DeviceConnectionRepository, 'window'>,
  assignments: readonly AssignmentRecord[],
  deviceId: string,
  w: HistoryWindow,
): HistoryInterval[] {
  const fromIso = new Date(w.fromMs).toISOString();
  const toIso = new Date(w.toMs).toISOString();
  const seen = connections.window(deviceId, fromIso, toIso);
  const periods = offlinePeriods(seen.before, seen.changes);
  const profile = deviceHistory(reader, assignments, deviceId, w);
  if (periods.length === 0) return profile;
  return withOffline(deviceId, profile, periods.map((period) => ({ period, runs: reportedRuns(reader, deviceId, period) })), w);
}

export function createHistoryReader(store: Pick<Store, 'eventRanges' | 'devices' | 'deviceConnections'>): HistoryReader {
  const reader = store.eventRanges;
  const connections = store.deviceConnections;
  const one = (deviceId: string, w: HistoryWindow) => deviceHistoryWithOffline(reader, connections, store.devices.assignments(deviceId), deviceId, w);
  const everyDevice = (w: HistoryWindow, keep: (i: HistoryInterval) => boolean) =>
    store.devices.list().flatMap((d) => one(d.id, w).filter(keep));
  return {
    device: one,
    task: (task, w) => everyDevice(w, (i) => i.kind === 'profile' && i.task === task),
    release: (releaseId, w) => everyDevice(w, (i) => i.kind === 'profile' && i.releaseId === releaseId),
  };
}
