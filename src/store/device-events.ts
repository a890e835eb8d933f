import type { SqlConnection } from './sql-connection.js';

/** One event as stored: numbered by the device, unique per (device, seq). */
export interface StoredDeviceEvent {
  deviceId: string;
  seq: number;
  /** When the device recorded it (ISO 8601, the device's clock). */
  ts: string;
  type: string;
  /** The event as the device sent it (src/protocol DeviceEvent). */
  event: unknown;
  receivedAt: string;
}

export interface NewDeviceEvent {
  seq: number;
  ts: string;
  type: string;
  /** JSON text of the whole event. */
  json: string;
}

/** The same events as parallel columns: cheaper to build and to post to a worker thread than one object each. */
export interface DeviceEventColumns {
  /** The device's event-log epoch; absent for agents that send none. */
  epoch?: string;
  seqs: number[];
  tss: string[];
  types: string[];
  jsons: string[];
}

interface Row {
  device_id: string;
  seq: number;
  ts: string;
  type: string;
  event: string;
  received_at: string;
}

export interface DeviceEventRepository {
  /** Inserts events; a (device, seq) already stored is ignored, so a resent batch is harmless. Returns how many were new. Call inside a transaction. */
  insert(deviceId: string, events: readonly NewDeviceEvent[], receivedAt: string): number;
  /** The same as insert, for events given as columns. */
  insertColumns(deviceId: string, events: DeviceEventColumns, receivedAt: string): number;
  /** Highest seq n such that every event 1..n of the device is stored (0 when event 1 is missing). */
  contiguousSeq(deviceId: string): number;
  setContiguousSeq(deviceId: string, seq: number): void;
  /**
   * The stored contiguous seq, held until the transaction ends, so replicas advancing one device's cursor take
   * turns and the second reads what the first committed. PostgreSQL: the cursor row is made if missing and locked
   * (SELECT … FOR UPDATE; under READ COMMITTED the next statement then sees the other's committed rows, PostgreSQL
   * documentation, "Transaction Isolation"). SQLite: a write transaction already excludes every other writer.
   */
  lockContiguousSeq(deviceId: string): number;
  /** Highest stored seq of a device (0 when none). */
  maxSeq(deviceId: string): number;
  /** Stored seqs above a given one, ascending: the events that arrived ahead of a gap. */
  seqsAbove(deviceId: string, seq: number): number[];
  list(deviceId: string, options?: { afterSeq?: number; type?: string; limit?: number }): StoredDeviceEvent[];
  count(deviceId?: string): number;
  /** Stored events by type, over every device or one. */
  countByType(deviceId?: string): Record<string, number>;
}

function toRecord(row: Row): StoredDeviceEvent {
  return { deviceId: row.device_id, seq: row.seq, ts: row.ts, type: row.type, event: JSON.parse(row.event), receivedAt: row.received_at };
}

export function createDeviceEventRepository(db: SqlConnection): DeviceEventRepository {
  // Prepared once: the bridge inserts tens of thousands of rows a second through these.
  const insertRow = db.prepare('INSERT INTO device_events (device_id, seq, ts, type, event, received_at) VALUES (?, ?, ?, ?, ?, ?) ON CONFLICT DO NOTHING');
  // PostgreSQL: a statement costs a round trip, so a device's whole batch goes in one, its columns as arrays.
  const insertMany = db.dialect === 'postgres'
    ? db.prepare(`INSERT INTO device_events (device_id, seq, ts, type, event, received_at)
        SELECT ?, s, t, y, e, ? FROM unnest(?::bigint[], ?::text[], ?::text[], ?::text[]) AS u (s, t, y, e) ON CONFLICT DO NOTHING`)
    : null;
  const cursorRow = db.prepare('SELECT contiguous_seq AS n FROM device_event_cursor WHERE device_id = ?');
  const setCursor = db.prepare(`INSERT INTO device_event_cursor (device_id, contiguous_seq) VALUES (?, ?)
    ON CONFLICT (device_id) DO UPDATE SET contiguous_seq = excluded.contiguous_seq`);
  const highest = db.prepare('SELECT seq FROM device_events WHERE device_id = ? ORDER BY seq DESC LIMIT 1').pluck();
  const above = db.prepare('SELECT seq FROM device_events WHERE device_id = ? AND seq > ? ORDER BY seq').pluck();
  const cursorLock = db.dialect === 'postgres'
    ? {
        ensure: db.prepare('INSERT INTO device_event_cursor (device_id, contiguous_seq) VALUES (?, 0) ON CONFLICT DO NOTHING'),
        read: db.prepare('SELECT contiguous_seq AS n FROM device_event_cursor WHERE device_id = ? FOR UPDATE'),
      }
    : null;
  const listRows = db.prepare(`SELECT * FROM device_events WHERE device_id = @deviceId AND seq > @afterSeq
    AND (CAST(@type AS TEXT) IS NULL OR type = @type) ORDER BY seq LIMIT @limit`);
  const countAll = db.prepare('SELECT COUNT(*) AS n FROM device_events');
  const countOne = db.prepare('SELECT COUNT(*) AS n FROM device_events WHERE device_id = ?');
  const typesAll = db.prepare('SELECT type, COUNT(*) AS n FROM device_events GROUP BY type');
  const typesOne = db.prepare('SELECT type, COUNT(*) AS n FROM device_events WHERE device_id = ? GROUP BY type');

  return {
    insert: function insert(deviceId, events, receivedAt) {
      if (insertMany) return insertMany.run(deviceId, receivedAt, events.map((e) => e.seq), events.map((e) => e.ts), events.map((e) => e.type), events.map((e) => e.json)).changes;
      let added = 0;
      for (const e of events) added += insertRow.run(deviceId, e.seq, e.ts, e.type, e.json, receivedAt).changes;
      return added;
    },
    insertColumns: function insertColumns(deviceId, { seqs, tss, types, jsons }, receivedAt) {
      if (insertMany) return insertMany.run(deviceId, receivedAt, seqs, tss, types, jsons).changes;
      let added = 0;
      for (let i = 0; i < seqs.length; i++) added += insertRow.run(deviceId, seqs[i], tss[i], types[i], jsons[i], receivedAt).changes;
      return added;
    },
    contiguousSeq: function contiguousSeq(deviceId) {
      return (cursorRow.get(deviceId) as { n: number } | undefined)?.n ?? 0;
    },
    setContiguousSeq: function setContiguousSeq(deviceId, seq) {
      setCursor.run(deviceId, seq);
    },
    lockContiguousSeq: function lockContiguousSeq(deviceId) {
      if (!cursorLock) return (cursorRow.get(deviceId) as { n: number } | undefined)?.n ?? 0;
      cursorLock.ensure.run(deviceId);
      return (cursorLock.read.get(deviceId) as { n: number }).n;
    },
    maxSeq: function maxSeq(deviceId) {
      return (highest.get(deviceId) as number | undefined) ?? 0;
    },
    seqsAbove: function seqsAbove(deviceId, seq) {
      return above.all(deviceId, seq) as number[];
    },
    list: function list(deviceId, options = {}) {
      const rows = listRows.all({ deviceId, afterSeq: options.afterSeq ?? 0, type: options.type ?? null, limit: options.limit ?? 1000 }) as Row[];
      return rows.map(toRecord);
    },
    count: function count(deviceId) {
      return ((deviceId === undefined ? countAll.get() : countOne.get(deviceId)) as { n: number }).n;
    },
    countByType: function countByType(deviceId) {
      const rows = (deviceId === undefined ? typesAll.all() : typesOne.all(deviceId)) as Array<{ type: string; n: number }>;
      return Object.fromEntries(rows.map((r) => [r.type, r.n]));
    },
  };
}

