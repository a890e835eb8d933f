import Database from 'better-sqlite3';
import { createDeviceConnectionRepository, type DeviceConnectionRepository } from './device-connections.js';
import { createDeviceEventEpochRepository, type DeviceEventEpochRepository } from './device-event-epochs.js';
import { createDeviceEventRepository, type DeviceEventRepository } from './device-events.js';
import { createDeviceStateRepository, type DeviceStateRepository } from './device-state.js';

/** The repositories an event writer needs, on a connection of its own. */
export interface EventWriterStore {
  readonly deviceEvents: DeviceEventRepository;
  readonly deviceEventEpochs: DeviceEventEpochRepository;
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
    deviceEventEpochs: createDeviceEventEpochRepository(db),
    deviceStates: createDeviceStateRepository(db),
    deviceConnections: createDeviceConnectionRepository(db),
    transaction: <T>(fn: () => T): T => db.transaction(fn)(),
    close: () => {
      if (db.open) db.close();
    },
  };
}
