import type Database from 'better-sqlite3';

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
export function createEventRangeReader(db: Database.Database): EventRangeReader {
  const bounds = db.prepare('SELECT MIN(seq) AS lo, MAX(seq) AS hi FROM device_events WHERE device_id = ?');
  const atOrAfter = db.prepare('SELECT seq, ts FROM device_events WHERE device_id = ? AND seq >= ? ORDER BY seq LIMIT 1');
  const typedRange = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? AND seq >= ? AND seq < ? ORDER BY seq');
  const typedBefore = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? AND seq < ? ORDER BY seq DESC LIMIT 1');
  const typedFrom = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? AND seq >= ? ORDER BY seq LIMIT 1');
  const typedLatest = db.prepare('SELECT seq, ts, event FROM device_events WHERE type = ? AND device_id = ? ORDER BY seq DESC LIMIT ?');

  /** A seq boundary b: every stored seq below b is earlier than atMs, every stored seq from b on is not (hi + 1 when none is). */
  function firstSeqAt(deviceId: string, lo: number, hi: number, atMs: number): number {
    let left = lo;
    let right = hi + 1;
    while (left < right) {
      const mid = Math.floor((left + right) / 2);
      const row = atOrAfter.get(deviceId, mid) as { seq: number; ts: string } | undefined;
      if (!row) {
        right = mid;
        continue;
      }
      // No seq in [mid, row.seq) is stored, so the boundary is either below mid or just after row.seq.
      if (Date.parse(row.ts) >= atMs) right = mid;
      else left = row.seq + 1;
    }
    return left;
  }

  return {
    seqRange: function seqRange(deviceId, fromMs, toMs) {
      const b = bounds.get(deviceId) as { lo: number | null; hi: number | null };
      if (b.lo === null || b.hi === null) return { loSeq: 1, hiSeq: 1 };
      const loSeq = firstSeqAt(deviceId, b.lo, b.hi, fromMs);
      const hiSeq = firstSeqAt(deviceId, loSeq, b.hi, toMs);
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
    maxSeq: function maxSeq(deviceId) {
      return (bounds.get(deviceId) as { hi: number | null }).hi ?? 0;
    },
  };
}
