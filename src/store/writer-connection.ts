import Database from 'better-sqlite3';
import { createDeviceConnectionRepository, type DeviceConnectionRepository } from './device-connections.js';
import { createDeviceEventEpochRepository, type DeviceEventEpochRepository } from './device-event-epochs.js';
import { createDeviceEventRepository, type DeviceEventRepository } from './device-events.js';
import { createDeviceStateRepository, type DeviceStateRepository } from './device-state.js';
import { openPgSyncConnection } from './pg-sync-connection.js';
import { sqliteConnection, type SqlConnection } from './sql-connection.js';

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
 * A second connection to the server's (already migrated) database for the event writer. `location` is the
 * store's: a SQLite file or a postgres:// URL.
 *
 * SQLite: the store's settings (WAL, foreign keys, a busy timeout for the moments the main connection writes)
 * except synchronous = FULL. Its commits precede the acks that let devices drop their events, so each must be on
 * disk before the ack: in WAL mode NORMAL survives a crash of the process but may lose the last commits on a
 * power cut, while FULL syncs the WAL at every commit (SQLite documentation, "PRAGMA synchronous").
 *
 * PostgreSQL: a connection of its own with synchronous_commit on (the server's default: COMMIT returns after
 * the WAL is flushed), so the same holds. Each device's events of a batch go in one multi-row INSERT … ON
 * CONFLICT DO NOTHING; the writer runs on its own thread, so waiting for each statement stops only that thread.
 */
export function openEventWriterStore(location: string, busyTimeoutMs: number): EventWriterStore {
  const conn = /^postgres(ql)?:\/\//i.test(location) ? openPostgresWriter(location, busyTimeoutMs) : openSqliteWriter(location, busyTimeoutMs);
  return {
    deviceEvents: createDeviceEventRepository(conn),
    deviceEventEpochs: createDeviceEventEpochRepository(conn),
    deviceStates: createDeviceStateRepository(conn),
    deviceConnections: createDeviceConnectionRepository(conn),
    transaction: <T>(fn: () => T): T => conn.transaction(fn),
    close: () => conn.close(),
  };
}

function openSqliteWriter(location: string, busyTimeoutMs: number): SqlConnection {
  const db = new Database(location, { fileMustExist: true });
  db.pragma('journal_mode = WAL');
  db.pragma('foreign_keys = ON');
  db.pragma(`busy_timeout = ${Math.max(0, Math.floor(busyTimeoutMs))}`);
  db.pragma('synchronous = FULL');
  const conn = sqliteConnection(db);
  // IMMEDIATE: the write lock is taken at BEGIN, where the busy timeout lets it wait for other connections (the
  // main one, or another replica's on the same file) instead of failing on a read that turns into a write.
  return { ...conn, transaction: <T>(fn: () => T): T => db.transaction(fn).immediate(), get inTransaction() { return db.inTransaction; } };
}

function openPostgresWriter(url: string, busyTimeoutMs: number): SqlConnection {
  const conn = openPgSyncConnection({ url, applicationName: 'ocellus-event-writer', statementTimeoutMs: Math.max(1000, busyTimeoutMs * 6) });
  conn.exec('SET synchronous_commit = on');
  return conn;
}
