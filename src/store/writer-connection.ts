import Database from 'better-sqlite3';
import { createDeviceConnectionRepository, type DeviceConnectionRepository } from './device-connections.js';
import { createDeviceEventRepository, type DeviceEventRepository } from './device-events.js';
import { createDeviceStateRepository, type DeviceStateRepository } from './device-state.js';

/** The repositories an event writer needs, on a connection of its own. */
export interface EventWriterStore {
  readonly deviceEvents: DeviceEventRepository;
  readonly deviceStates: DeviceStateRepository;
  readonly deviceConnections: DeviceConnectionRepository;
  transaction<T>(fn: () => T): T;
  close(): void;
}

/**
 * A second connection to the server's (already migrated) database for the event writer, with the
 * store's settings (WAL, foreign keys, a busy timeout for the moments the main connection writes) except
 * synchronous = FULL. Its commits precede the acks that let devices drop their events, so each must be on
 * disk before the ack: in WAL mode NORMAL survives a crash of the process but may lose the last commits on a
 * power cut, while FULL syncs the WAL at every commit (SQLite documentation, "PRAGMA synchronous").
 */
export function openEventWriterStore(location: string, busyTimeoutMs: number): EventWriterStore {
  const db = new Database(location, { fileMustExist: true });
  db.pragma('journal_mode = WAL');
  db.pragma('foreign_keys = ON');
  db.pragma(`busy_timeout = ${Math.max(0, Math.floor(busyTimeoutMs))}`);
  db.pragma('synchronous = FULL');
  return {
    deviceEvents: createDeviceEventRepository(db),
    deviceStates: createDeviceStateRepository(db),
    deviceConnections: createDeviceConnectionRepository(db),
    // IMMEDIATE: the write lock is taken at BEGIN, where the busy timeout lets it wait for other connections (the
    // main one, or another replica's on the same file) instead of failing on a read that turns into a write.
    transaction: <T>(fn: () => T): T => db.transaction(fn).immediate(),
    close: () => {
      if (db.open) db.close();
    },
  };
}
