import type { ConnectionCause, ConnectionChange } from '../../store/device-connections.js';
import type { EventRangeReader } from '../../store/event-ranges.js';
import type { HistoryInterval } from './intervals.js';

/** A stretch during which the server had no connection to the device: from going offline to coming back (or null: still away). */
export interface OfflinePeriod {
  startMs: number;
  endMs: number | null;
  cause: ConnectionCause;
  /** The release the device had applied, and the task it last reported, when it went. */
  releaseId: string | null;
  lastKnownTask: string | null;
}

/** A stretch inside an offline period that the device's own events, delivered later, account for. */
export interface ReportedRun {
  startMs: number;
  endMs: number;
}

/** Offline periods from a device's connection changes (oldest first), `before` being the last change ahead of them. */
export function offlinePeriods(before: ConnectionChange | null, changes: readonly ConnectionChange[]): OfflinePeriod[] {
  const periods: OfflinePeriod[] = [];
  let open: OfflinePeriod | null = null;
  for (const c of before ? [before, ...changes] : changes) {
    if (!c.online && !open) {
      open = { startMs: Date.parse(c.at), endMs: null, cause: c.cause, releaseId: c.releaseId, lastKnownTask: c.task };
      periods.push(open);
    } else if (c.online && open) {
      open.endMs = Date.parse(c.at);
      open = null;
    }
  }
  return periods;
}

/**
 * What the device's own events say it did while the server could not see it. The agent that was running
 * when the device went kept running until its last event before a restart (an `agent-started` event), or
 * through the whole period when it came back without restarting (the same process reconnected). A
 * restarted agent runs its profile from its first task switch after the restart to its last event before
 * the next restart, or until it came back. Times are the device's clock.
 */
export function reportedRuns(reader: EventRangeReader, deviceId: string, p: OfflinePeriod): ReportedRun[] {
  const endMs = p.endMs ?? Number.POSITIVE_INFINITY;
  const range = reader.seqRange(deviceId, p.startMs, p.endMs ?? 8.64e15);
  const starts = reader.ofType(deviceId, 'agent-started', range);
  const lastBefore = (seq: number): number | null => {
    const e = reader.lastAnyBefore(deviceId, seq);
    if (!e) return null;
    const ms = Date.parse(e.ts);
    return ms > p.startMs && ms < endMs ? ms : null;
  };
  const runs: ReportedRun[] = [];
  const push = (startMs: number, runEndMs: number | null) => {
    if (runEndMs !== null && runEndMs > startMs) runs.push({ startMs, endMs: runEndMs });
  };
  // The process that was running when the device went.
  if (starts.length === 0) push(p.startMs, p.endMs ?? lastBefore(range.hiSeq));
  else push(p.startMs, lastBefore(starts[0]!.seq));
  starts.forEach((s, i) => {
    const next = starts[i + 1];
    const firstSwitch = reader.firstFrom(deviceId, 'task-switched', s.seq);
    if (!firstSwitch) return;
    const fromMs = Date.parse(firstSwitch.ts);
    if (next && firstSwitch.seq >= next.seq) return;
    if (fromMs >= endMs) return;
    push(fromMs, next ? lastBefore(next.seq) : (p.endMs ?? lastBefore(range.hiSeq)));
  });
  return runs;
}

interface Piece {
  startMs: number;
  endMs: number;
  state: 'live' | 'late' | 'gap';
}

function offlineInterval(deviceId: string, p: OfflinePeriod, startMs: number, endMs: number | null): HistoryInterval {
  return {
    kind: 'offline',
    deviceId,
    task: null,
    profileId: null,
    profileRevision: null,
    releaseId: p.releaseId,
    lastKnownTask: p.lastKnownTask,
    start: new Date(startMs).toISOString(),
    end: endMs === null ? null : new Date(endMs).toISOString(),
    reason: p.cause,
    seq: null,
    cause: null,
    reported: 'live',
  };
}

/**
 * Merges a device's profile intervals with the periods it was offline. Inside a period, what the
 * device's delivered events account for stays on its profile, marked as reported after the fact; the
 * rest becomes `offline` intervals (task unknown, the release it last had noted). The result is clipped
 * to [fromMs, toMs) and sorted; an interval still open has end null (the window reaches the present).
 */
export function withOffline(
  deviceId: string,
  profile: readonly HistoryInterval[],
  periods: ReadonlyArray<{ period: OfflinePeriod; runs: ReportedRun[] }>,
  w: { fromMs: number; toMs: number; nowMs: number },
): HistoryInterval[] {
  if (periods.length === 0) return [...profile];
  const open = w.toMs >= w.nowMs;
  const horizon = open ? Math.max(w.nowMs, w.toMs) : w.toMs;
  // Piecewise state of the timeline: live outside the periods, late in a period's runs, a gap elsewhere in a period.
  const pieces: Piece[] = [];
  for (const { period, runs } of periods) {
    const end = period.endMs ?? horizon;
    let at = period.startMs;
    for (const r of [...runs].sort((a, b) => a.startMs - b.startMs)) {
      if (r.startMs > at) pieces.push({ startMs: at, endMs: Math.min(r.startMs, end), state: 'gap' });
      pieces.push({ startMs: Math.max(at, r.startMs), endMs: Math.min(r.endMs, end), state: 'late' });
      at = Math.max(at, r.endMs);
    }
    if (at < end) pieces.push({ startMs: at, endMs: end, state: 'gap' });
  }
  const stateAt = (ms: number): Piece['state'] => pieces.find((p) => p.startMs <= ms && ms < p.endMs)?.state ?? 'live';
  const cuts = [...new Set(pieces.flatMap((p) => [p.startMs, p.endMs]))].sort((a, b) => a - b);

  const out: HistoryInterval[] = [];
  for (const iv of profile) {
    const s = Date.parse(iv.start);
    const e = iv.end === null ? horizon : Date.parse(iv.end);
    const bounds = [s, ...cuts.filter((c) => c > s && c < e), e];
    for (let i = 0; i + 1 < bounds.length; i++) {
      const a = bounds[i]!;
      const b = bounds[i + 1]!;
      if (b <= a) continue;
      const state = stateAt(a);
      if (state === 'gap') continue;
      const reported = state === 'late' ? 'after-the-fact' : 'live';
      const last = out.at(-1);
      if (last && last.seq === iv.seq && last.kind === 'profile' && last.reported === reported && last.end === new Date(a).toISOString()) {
        last.end = new Date(b).toISOString();
      } else {
        out.push({ ...iv, start: new Date(a).toISOString(), end: new Date(b).toISOString(), reported });
      }
    }
    // The piece that reaches the open end of the original interval stays open.
    const tail = out.at(-1);
    if (iv.end === null && tail && tail.seq === iv.seq && tail.end === new Date(horizon).toISOString() && open) tail.end = null;
  }
  for (const { period } of periods) {
    for (const g of pieces) {
      if (g.state !== 'gap' || g.startMs < period.startMs || g.startMs >= (period.endMs ?? horizon) || g.endMs <= g.startMs) continue;
      const startMs = Math.max(g.startMs, w.fromMs);
      const endMs = Math.min(g.endMs, w.toMs);
      if (endMs <= startMs && !(period.endMs === null && open && startMs < horizon)) continue;
      const stillAway = period.endMs === null && g.endMs === horizon && open;
      out.push(offlineInterval(deviceId, period, startMs, stillAway ? null : endMs));
    }
  }
  return out
    .filter((i) => i.end === null || Date.parse(i.end) > Date.parse(i.start))
    .sort((a, b) => Date.parse(a.start) - Date.parse(b.start) || (a.kind === 'offline' ? 1 : -1));
}
