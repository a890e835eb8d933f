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
 * store's settings: WAL, foreign keys, a busy timeout for the moments the main connection writes, and
 * synchronous = NORMAL. In WAL mode NORMAL keeps every commit across a crash of the process (the
 * commit is in the WAL file before the ack is sent) and the database consistent across a power cut,
 * where the last commits before the WAL's next sync may be lost (SQLite documentation, "PRAGMA synchronous").
 */
export function openEventWriterStore(location: string, busyTimeoutMs: number): EventWriterStore {
  const db = new Database(location, { fileMustExist: true });
  db.pragma('journal_mode = WAL');
  db.pragma('foreign_keys = ON');
  db.pragma(`busy_timeout = ${Math.max(0, Math.floor(busyTimeoutMs))}`);
  db.pragma('synchronous = NORMAL');
  return {
    deviceEvents: createDeviceEventRepository(db),
    deviceStates: createDeviceStateRepository(db),
    deviceConnections: createDeviceConnectionRepository(db),
    transaction: <T>(fn: () => T): T => db.transaction(fn)(),
    close: () => {
      if (db.open) db.close();
    },
  };
}
