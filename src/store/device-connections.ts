import type { SqlConnection } from './sql-connection.js';

/**
 * Why the server counts a device as having come online or gone offline:
 * - connected: first state message seen online; reconnected: online again after being offline;
 * - last-will: the broker published the device's last will (its connection dropped);
 * - clean-disconnect: the agent said it was shutting down before it disconnected;
 * - keepalive-missed: the embedded broker heard nothing within 1.5 × the keep-alive and dropped the connection;
 * - found-offline: a retained offline state found when the server subscribed (it went offline while the server was away);
 * - event-log-restarted: not a change but a note: the device's agent began a new event log (a new epoch; its data
 *   folder was wiped or the agent installed anew), numbering its events from 1 again. It carries the online flag
 *   the server held, so it neither opens nor closes an offline stretch.
 */
export const CONNECTION_CAUSES = ['connected', 'reconnected', 'last-will', 'clean-disconnect', 'keepalive-missed', 'found-offline', 'event-log-restarted'] as const;
export type ConnectionCause = (typeof CONNECTION_CAUSES)[number];

/** One change of a device's connection as the server saw it, on the server's clock. */
export interface ConnectionChange {
  deviceId: string;
  id: number;
  /** When the server saw the change (ISO 8601, server clock). */
  at: string;
  online: boolean;
  cause: ConnectionCause;
  /** The release the device last reported as applied, when the change was seen. */
  releaseId: string | null;
  /** The task the device last reported running, when the change was seen. */
  task: string | null;
}

export type NewConnectionChange = Omit<ConnectionChange, 'id'>;

interface Row {
  id: number;
  device_id: string;
  at: string;
  online: number;
  cause: string;
  release_id: string | null;
  task: string | null;
}

function toRecord(r: Row): ConnectionChange {
  return { deviceId: r.device_id, id: r.id, at: r.at, online: r.online === 1, cause: r.cause as ConnectionCause, releaseId: r.release_id, task: r.task };
}

export interface DeviceConnectionRepository {
  insert(change: NewConnectionChange): void;
  /** The changes with fromIso ≤ at < toIso, oldest first. */
  between(deviceId: string, fromIso: string, toIso: string): ConnectionChange[];
  /** The latest change before a time, or null. */
  lastBefore(deviceId: string, beforeIso: string): ConnectionChange | null;
  /** The newest changes, newest first. */
  latest(deviceId: string, limit: number): ConnectionChange[];
}

/** Times are stored as UTC ISO 8601 with milliseconds (Date#toISOString), so text order is time order. */
export function createDeviceConnectionRepository(db: SqlConnection): DeviceConnectionRepository {
  const insertRow = db.prepare(`INSERT INTO device_connections (device_id, at, online, cause, release_id, task)
    VALUES (@deviceId, @at, @online, @cause, @releaseId, @task)`);
  const betweenRows = db.prepare('SELECT * FROM device_connections WHERE device_id = ? AND at >= ? AND at < ? ORDER BY at, id');
  const beforeRow = db.prepare('SELECT * FROM device_connections WHERE device_id = ? AND at < ? ORDER BY at DESC, id DESC LIMIT 1');
  const latestRows = db.prepare('SELECT * FROM device_connections WHERE device_id = ? ORDER BY at DESC, id DESC LIMIT ?');
  return {
    insert: function insert(c) {
      insertRow.run({ ...c, online: c.online ? 1 : 0 });
    },
    between: function between(deviceId, fromIso, toIso) {
      return (betweenRows.all(deviceId, fromIso, toIso) as Row[]).map(toRecord);
    },
    lastBefore: function lastBefore(deviceId, beforeIso) {
      const row = beforeRow.get(deviceId, beforeIso) as Row | undefined;
      return row ? toRecord(row) : null;
    },
    latest: function latest(deviceId, limit) {
      return (latestRows.all(deviceId, limit) as Row[]).map(toRecord);
    },
  };
}
