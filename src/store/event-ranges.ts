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

/** One read of a time window for one event type: the seq range, its typed events, and their neighbours outside it. */
export interface TypedWindow {
  range: SeqRange;
  /** Events of the type with loSeq ≤ seq < hiSeq, ascending. */
  events: RangeEvent[];
  /** The last event of the type before loSeq, or null. */
  before: RangeEvent | null;
  /** The first event of the type at or after hiSeq, or null. */
  after: RangeEvent | null;
}

export interface EventRangeReader {
  /**
   * seqRange, ofType, lastBefore(range.loSeq) and firstFrom(range.hiSeq) together. On PostgreSQL one
   * statement (the search runs in the server); on SQLite the same point reads as the four calls.
   */
  typedWindow(deviceId: string, type: string, fromMs: number, toMs: number): TypedWindow;
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

  const seqRange = function seqRange(deviceId: string, fromMs: number, toMs: number): SeqRange {
    const lo = edge(lowest.get(deviceId) as { seq: number; ts: string } | undefined);
    const hi = edge(highest.get(deviceId) as { seq: number; ts: string } | undefined);
    if (!lo || !hi) return { loSeq: 1, hiSeq: 1 };
    const loSeq = firstSeqAt(deviceId, lo, hi, fromMs);
    const hiSeq = firstSeqAt(deviceId, lo, hi, toMs);
    return { loSeq, hiSeq: Math.max(loSeq, hiSeq) };
  };
  const typedWindow = db.dialect === 'postgres' ? serverTypedWindow(db) : null;

  const edge = (row: { seq: number; ts: string } | undefined) => (row ? { seq: row.seq, ms: Date.parse(row.ts) } : undefined);

  return {
    seqRange,
    typedWindow:
      typedWindow ??
      function localTypedWindow(deviceId, type, fromMs, toMs) {
        const range = seqRange(deviceId, fromMs, toMs);
        const before = typedBefore.get(type, deviceId, range.loSeq) as Row | undefined;
        const after = typedFrom.get(type, deviceId, range.hiSeq) as Row | undefined;
        return {
          range,
          events: (typedRange.all(type, deviceId, range.loSeq, range.hiSeq) as Row[]).map(toEvent),
          before: before ? toEvent(before) : null,
          after: after ? toEvent(after) : null,
        };
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

/**
 * PostgreSQL's typedWindow: the same interpolation search as firstSeqAt, run inside the server as a recursive
 * query (one row per bound and step, the state being firstSeqAt's variables), then the typed events and both
 * neighbours, in one statement: one round trip instead of about twenty. Interpolation matters here, not only
 * on SQLite: each probe reads ts from the table's heap, and a steady event rate lands in a few probes where
 * plain bisection takes log2(n). Times are compared as instants truncated to milliseconds (ts::timestamptz,
 * floor of epoch × 1000), as Date.parse does.
 */
function serverTypedWindow(db: SqlConnection): EventRangeReader['typedWindow'] {
  const statement = db.prepare(`
    WITH RECURSIVE
      edges AS (
        SELECT lo.seq AS lo_seq, lo.ms AS lo_ms, hi.seq AS hi_seq, hi.ms AS hi_ms
        FROM (SELECT seq, floor(extract(epoch FROM ts::timestamptz) * 1000)::bigint AS ms FROM device_events
              WHERE device_id = @device ORDER BY seq LIMIT 1) lo,
             (SELECT seq, floor(extract(epoch FROM ts::timestamptz) * 1000)::bigint AS ms FROM device_events
              WHERE device_id = @device ORDER BY seq DESC LIMIT 1) hi),
      bounds (bound, at) AS (VALUES (0, @fromMs::bigint), (1, @toMs::bigint)),
      search (bound, at, a, am, b, bm, lim, bis, answer) AS (
        SELECT k.bound, k.at, e.lo_seq, e.lo_ms, e.hi_seq, e.hi_ms, e.hi_seq, false,
               CASE WHEN e.lo_ms >= k.at THEN e.lo_seq WHEN e.hi_ms < k.at THEN e.hi_seq + 1 END
        FROM bounds k CROSS JOIN edges e
        UNION ALL
        SELECT s.bound, s.at,
               CASE WHEN p.seq < s.lim AND p.ms < s.at THEN p.seq ELSE s.a END,
               CASE WHEN p.seq < s.lim AND p.ms < s.at THEN p.ms ELSE s.am END,
               CASE WHEN p.seq < s.lim AND p.ms >= s.at THEN p.seq ELSE s.b END,
               CASE WHEN p.seq < s.lim AND p.ms >= s.at THEN p.ms ELSE s.bm END,
               CASE WHEN p.seq >= s.lim OR p.ms >= s.at THEN m.mid ELSE s.lim END,
               NOT s.bis,
               NULL::bigint
        FROM search s
        CROSS JOIN LATERAL (
          SELECT least(s.lim - 1, greatest(s.a + 1, floor(0.5 + CASE WHEN s.bis OR s.bm <= s.am THEN (s.a + s.lim) / 2.0
                 ELSE s.a + (s.at - s.am)::float8 / (s.bm - s.am) * (s.b - s.a) END)::bigint)) AS mid) m
        CROSS JOIN LATERAL (
          SELECT seq, floor(extract(epoch FROM ts::timestamptz) * 1000)::bigint AS ms FROM device_events
          WHERE device_id = @device AND seq >= m.mid ORDER BY seq LIMIT 1) p
        WHERE s.answer IS NULL AND s.lim - s.a > 1),
      found AS (
        SELECT bound, coalesce(answer, b) AS seq FROM search WHERE answer IS NOT NULL OR lim - a <= 1),
      range AS (
        SELECT coalesce((SELECT seq FROM found WHERE bound = 0), 1) AS lo_seq,
               coalesce((SELECT seq FROM found WHERE bound = 1), 1) AS hi_seq)
    SELECT 'range' AS part, r.lo_seq AS seq, greatest(r.lo_seq, r.hi_seq)::text AS ts, NULL AS event FROM range r
    UNION ALL
    SELECT 'before', b.seq, b.ts, b.event FROM range r CROSS JOIN LATERAL (
      SELECT seq, ts, event FROM device_events WHERE type = @type AND device_id = @device AND seq < r.lo_seq ORDER BY seq DESC LIMIT 1) b
    UNION ALL
    SELECT 'in', i.seq, i.ts, i.event FROM range r CROSS JOIN LATERAL (
      SELECT seq, ts, event FROM device_events
      WHERE type = @type AND device_id = @device AND seq >= r.lo_seq AND seq < greatest(r.lo_seq, r.hi_seq) ORDER BY seq) i
    UNION ALL
    SELECT 'after', f.seq, f.ts, f.event FROM range r CROSS JOIN LATERAL (
      SELECT seq, ts, event FROM device_events WHERE type = @type AND device_id = @device AND seq >= greatest(r.lo_seq, r.hi_seq) ORDER BY seq LIMIT 1) f`);
  return function serverWindow(deviceId, type, fromMs, toMs) {
    const rows = statement.all({ device: deviceId, type, fromMs, toMs }) as Array<{ part: string; seq: number; ts: string; event: string | null }>;
    let range: SeqRange = { loSeq: 1, hiSeq: 1 };
    const events: RangeEvent[] = [];
    let before: RangeEvent | null = null;
    let after: RangeEvent | null = null;
    for (const r of rows) {
      if (r.part === 'range') range = { loSeq: r.seq, hiSeq: Number(r.ts) };
      else if (r.part === 'before') before = toEvent(r as Row);
      else if (r.part === 'after') after = toEvent(r as Row);
      else events.push(toEvent(r as Row));
    }
    return { range, events, before, after };
  };
}
