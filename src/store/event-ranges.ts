import type { SqlConnection } from './sql-connection.js';

/** A stored event as the fleet reads it: seq, device time and the event body. */
export interface RangeEvent {
  seq: number;
  ts: string;
  event: Record<string, unknown>;
}

/** Events of one device whose time falls in [fromMs, toMs): as a half-open seq range [loSeq, hiSeq). */
export interface SeqRange {
  loSeq: number;
  hiSeq: number;
}

export interface EventRangeReader {
  /** The seq range of a device's events with fromMs ≤ ts < toMs. */
  seqRange(deviceId: string, fromMs: number, toMs: number): SeqRange;
  /** Events of one type with loSeq ≤ seq < hiSeq, ascending. */
  ofType(deviceId: string, type: string, range: SeqRange): RangeEvent[];
  /** The last event of a type before a seq, or null. */
  lastBefore(deviceId: string, type: string, seq: number): RangeEvent | null;
  /** The first event of a type at or after a seq, or null. */
  firstFrom(deviceId: string, type: string, seq: number): RangeEvent | null;
  /** The latest events of a type, newest first. */
  latest(deviceId: string, type: string, limit: number): RangeEvent[];
  /** The last event of any type before a seq, or null. */
  lastAnyBefore(deviceId: string, seq: number): RangeEvent | null;
  /** Highest stored seq of a device (0 when none). */
  maxSeq(deviceId: string): number;
}

interface Row {
  seq: number;
  ts: string;
  event: string;
}

function toEvent(r: Row): RangeEvent {
  return { seq: r.seq, ts: r.ts, event: JSON.parse(r.event) as Record<string, unknown> };
}

/**
 * Range reads over device_events without an index on time: a device numbers its events in the order it
 * records them, so seq increases with ts per device and the first seq at or after a time is found by
 * binary search over the primary key (device_id, seq), about log2(n) point reads. Typed reads then use
 * the (type, device_id, seq) index. Times are compared as parsed instants, not as strings, so offsets
 * other than Z still order correctly.
 */
export function createEventRangeReader(db: SqlConnection): EventRangeReader {
  // Two queries, not MIN and MAX in one: SQLite answers a lone MIN or MAX from the index edge, both together by a scan.
  const lowest = db.prepare('SELECT seq, ts FROM device_events WHERE device_id = ? ORDER BY seq LIMIT 1');
  const highest = db.prepare('SELECT seq, ts FROM device_events WHERE device_id = ? ORDER BY seq DESC LIMIT 1');
  const atOrAfter = db.prepare('SELECT seq, ts FROM device_events WHERE device_id = ? AND seq >= ? ORDER BY seq LIMIT 1');
  const typedRange = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? AND seq >= ? AND seq < ? ORDER BY seq');
  const typedBefore = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? AND seq < ? ORDER BY seq DESC LIMIT 1');
  const typedFrom = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? AND seq >= ? ORDER BY seq LIMIT 1');
  const anyBefore = db.prepare('SELECT seq, ts, event FROM device_events WHERE device_id = ? AND seq < ? ORDER BY seq DESC LIMIT 1');
  const typedLatest = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? ORDER BY seq DESC LIMIT ?');

  /**
   * The smallest stored seq whose time is at or after atMs (hi.seq + 1 when none is). Interpolation search
   * (events come at a roughly steady rate, so a guess from the times lands near), alternating with bisection
   * so an uneven rate still costs at most about 2·log2(n) point reads. Invariant: the event at aSeq is
   * earlier than atMs; the answer is bSeq or a stored seq in (aSeq, limit); nothing is stored in [limit, bSeq).
   */
  function firstSeqAt(deviceId: string, lo: { seq: number; ms: number }, hi: { seq: number; ms: number }, atMs: number): number {
    if (lo.ms >= atMs) return lo.seq;
    if (hi.ms < atMs) return hi.seq + 1;
    let aSeq = lo.seq;
    let aMs = lo.ms;
    let bSeq = hi.seq;
    let bMs = hi.ms;
    let limit = hi.seq;
    let bisect = false;
    while (limit - aSeq > 1) {
      const guess = bisect || bMs <= aMs ? (aSeq + limit) / 2 : aSeq + ((atMs - aMs) / (bMs - aMs)) * (bSeq - aSeq);
      const mid = Math.min(limit - 1, Math.max(aSeq + 1, Math.round(guess)));
      bisect = !bisect;
      const row = atOrAfter.get(deviceId, mid) as { seq: number; ts: string };
      const ms = Date.parse(row.ts);
      if (row.seq >= limit) limit = mid;
      else if (ms >= atMs) {
        bSeq = row.seq;
        bMs = ms;
        limit = mid;
      } else {
        aSeq = row.seq;
        aMs = ms;
      }
    }
    return bSeq;
  }

  const edge = (row: { seq: number; ts: string } | undefined) => (row ? { seq: row.seq, ms: Date.parse(row.ts) } : undefined);

  return {
    seqRange: function seqRange(deviceId, fromMs, toMs) {
      const lo = edge(lowest.get(deviceId) as { seq: number; ts: string } | undefined);
      const hi = edge(highest.get(deviceId) as { seq: number; ts: string } | undefined);
      if (!lo || !hi) return { loSeq: 1, hiSeq: 1 };
      const loSeq = firstSeqAt(deviceId, lo, hi, fromMs);
      const hiSeq = firstSeqAt(deviceId, lo, hi, toMs);
      return { loSeq, hiSeq: Math.max(loSeq, hiSeq) };
    },
    ofType: function ofType(deviceId, type, range) {
      return (typedRange.all(type, deviceId, range.loSeq, range.hiSeq) as Row[]).map(toEvent);
    },
    lastBefore: function lastBefore(deviceId, type, seq) {
      const row = typedBefore.get(type, deviceId, seq) as Row | undefined;
      return row ? toEvent(row) : null;
    },
    firstFrom: function firstFrom(deviceId, type, seq) {
      const row = typedFrom.get(type, deviceId, seq) as Row | undefined;
      return row ? toEvent(row) : null;
    },
    latest: function latest(deviceId, type, limit) {
      return (typedLatest.all(type, deviceId, limit) as Row[]).map(toEvent);
    },
    lastAnyBefore: function lastAnyBefore(deviceId, seq) {
      const row = anyBefore.get(deviceId, seq) as Row | undefined;
      return row ? toEvent(row) : null;
    },
    maxSeq: function maxSeq(deviceId) {
      return (highest.get(deviceId) as { seq: number } | undefined)?.seq ?? 0;
    },
  };
}
