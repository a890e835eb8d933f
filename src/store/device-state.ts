import type { SqlConnection } from './sql-connection.js';

/** What the server knows of a device's own account: its latest retained state, whether it is online, when it was last heard. */
export interface DeviceStateRecord {
  deviceId: string;
  online: boolean;
  /** When the server last received anything from the device (ISO 8601). */
  lastSeenAt: string;
  /** The latest state message as the device published it (src/protocol StateMessage), or null before the first one. */
  state: unknown;
  releaseId: string | null;
  releaseVersion: number | null;
  activeTask: string | null;
  updatedAt: string;
}

interface Row {
  device_id: string;
  online: number;
  last_seen_at: string;
  state: string | null;
  release_id: string | null;
  release_version: number | null;
  active_task: string | null;
  updated_at: string;
}

function toRecord(row: Row): DeviceStateRecord {
  return {
    deviceId: row.device_id,
    online: row.online === 1,
    lastSeenAt: row.last_seen_at,
    state: row.state === null ? null : JSON.parse(row.state),
    releaseId: row.release_id,
    releaseVersion: row.release_version,
    activeTask: row.active_task,
    updatedAt: row.updated_at,
  };
}

export interface DeviceStateRepository {
  /** Stores a state message the device published (the device id comes from the topic, never the payload). */
  putState(deviceId: string, state: { online: boolean; releaseId: string | null; releaseVersion: number | null; activeTask: string | null }, at: string): void;
  /** The broker published the device's last will: offline, keeping what it last said it runs. */
  markOffline(deviceId: string, at: string): void;
  /** Any message from the device counts as a sign of life. */
  touch(deviceId: string, at: string): void;
  get(deviceId: string): DeviceStateRecord | null;
  /** What get gives without the state message itself (not parsed): enough to tell a connection change. */
  summary(deviceId: string): { online: boolean; hasState: boolean; releaseId: string | null; activeTask: string | null } | null;
  list(): DeviceStateRecord[];
  countOnline(): number;
}

export function createDeviceStateRepository(db: SqlConnection): DeviceStateRepository {
  const upsertState = db.prepare(`INSERT INTO device_state
      (device_id, online, last_seen_at, state, release_id, release_version, active_task, updated_at)
      VALUES (@deviceId, @online, @at, @state, @releaseId, @releaseVersion, @activeTask, @at)
    ON CONFLICT (device_id) DO UPDATE SET online = excluded.online, last_seen_at = excluded.last_seen_at,
      state = excluded.state, release_id = excluded.release_id, release_version = excluded.release_version,
      active_task = excluded.active_task, updated_at = excluded.updated_at`);
  const offline = db.prepare(`INSERT INTO device_state (device_id, online, last_seen_at, updated_at) VALUES (?, 0, ?, ?)
    ON CONFLICT (device_id) DO UPDATE SET online = 0, updated_at = excluded.updated_at`);
  const touchRow = db.prepare(`INSERT INTO device_state (device_id, online, last_seen_at, updated_at) VALUES (?, 0, ?, ?)
    ON CONFLICT (device_id) DO UPDATE SET last_seen_at = excluded.last_seen_at`);
  const oneRow = db.prepare('SELECT * FROM device_state WHERE device_id = ?');
  const summaryRow = db.prepare('SELECT online, CASE WHEN state IS NULL THEN 0 ELSE 1 END AS has_state, release_id, active_task FROM device_state WHERE device_id = ?');
  const allRows = db.prepare('SELECT * FROM device_state ORDER BY device_id');
  const onlineCount = db.prepare('SELECT COUNT(*) AS n FROM device_state WHERE online = 1');

  return {
    putState: function putState(deviceId, state, at) {
      upsertState.run({
        deviceId,
        online: state.online ? 1 : 0,
        at,
        state: JSON.stringify(state),
        releaseId: state.releaseId,
        releaseVersion: state.releaseVersion,
        activeTask: state.activeTask,
      });
    },
    markOffline: function markOffline(deviceId, at) {
      offline.run(deviceId, at, at);
    },
    touch: function touch(deviceId, at) {
      touchRow.run(deviceId, at, at);
    },
    get: function get(deviceId) {
      const row = oneRow.get(deviceId) as Row | undefined;
      return row ? toRecord(row) : null;
    },
    summary: function summary(deviceId) {
      const row = summaryRow.get(deviceId) as { online: number; has_state: number; release_id: string | null; active_task: string | null } | undefined;
      return row ? { online: row.online === 1, hasState: row.has_state === 1, releaseId: row.release_id, activeTask: row.active_task } : null;
    },
    list: function list() {
      return (allRows.all() as Row[]).map(toRecord);
    },
    countOnline: function countOnline() {
      return (onlineCount.get() as { n: number }).n;
    },
  };
}
