import Database from 'better-sqlite3';
import { chmodSync, closeSync, mkdirSync, openSync } from 'node:fs';
import { join } from 'node:path';
import { createAuditRepository, type AuditRepository } from './audit.js';
import { loadOrCreateDeviceSecretKey } from './device-secret-key.js';
import { createDeviceConnectionRepository, type DeviceConnectionRepository } from './device-connections.js';
import { createDeviceEventEpochRepository, type DeviceEventEpochRepository } from './device-event-epochs.js';
import { createDeviceEventRepository, type DeviceEventRepository } from './device-events.js';
import { createDeviceStateRepository, type DeviceStateRepository } from './device-state.js';
import { createDeviceRepository, type DeviceRepository } from './devices.js';
import { createDocumentRepository, type DocumentRepository } from './documents.js';
import { createDriftRepository, type DriftRepository } from './drift.js';
import { createEventRangeReader, type EventRangeReader } from './event-ranges.js';
import { applyMigrations, migrations as defaultMigrations, type Migration } from './migrations.js';
import { createProfileRepository, type ProfileRepository } from './profiles.js';
import { createReleaseRepository, type ReleaseRepository } from './releases.js';
import { createRolloutFactsRepository, type RolloutFactsRepository } from './rollout-facts.js';
import { createRolloutRepository, type RolloutRepository } from './rollouts.js';
import { registerSqliteHandle } from './sqlite-handle.js';
import { createTokenRepository, type TokenRepository } from './tokens.js';

/** What a savepoint gave back: the function's value, or the error it threw (its writes undone). */
export type Attempt<T> = { ok: true; value: T } | { ok: false; error: unknown };

export interface Store {
  readonly dataDir: string;
  /** Where the database lives (for SQLite the file path), for a second connection such as the event writer's. */
  readonly location: string;
  readonly documents: DocumentRepository;
  readonly profiles: ProfileRepository;
  readonly releases: ReleaseRepository;
  readonly devices: DeviceRepository;
  readonly tokens: TokenRepository;
  readonly audit: AuditRepository;
  /** The bus bridge's records: each device's latest retained state, and the events devices sent. */
  readonly deviceStates: DeviceStateRepository;
  readonly deviceEvents: DeviceEventRepository;
  /** Each device's event-log epochs (a wiped agent's new log is a new epoch). */
  readonly deviceEventEpochs: DeviceEventEpochRepository;
  /** Each device's connection changes as the server saw them (online, offline and why). */
  readonly deviceConnections: DeviceConnectionRepository;
  /** Reads of a device's events by time range and type (history, calibration, rollouts). */
  readonly eventRanges: EventRangeReader;
  readonly rollouts: RolloutRepository;
  /** The rollout gate's joined reads of rollout devices, states and events. */
  readonly rolloutFacts: RolloutFactsRepository;
  readonly drift: DriftRepository;
  /** Runs `fn` in one transaction: every write in it lands, or none does. Nested calls join the outer one. */
  transaction<T>(fn: () => T): T;
  /**
   * Inside a transaction: runs `fn` in a savepoint; when it throws, only its writes are undone and the error is
   * returned. Throws when the error abandoned the whole transaction (nothing is left to return to).
   */
  attempt<T>(fn: () => T): Attempt<T>;
  /** For the broker's authentication: an enrolled device with a matching MQTT password. */
  verifyDeviceCredentials(deviceId: string, password: string): boolean;
  /** True when the database has a table of that name (lets readers use optional tables of other parts). */
  hasTable(name: string): boolean;
  isOpen(): boolean;
  close(): void;
}

export interface OpenStoreOptions {
  migrations?: readonly Migration[];
  /** How long a writer waits for another connection's lock before failing, in milliseconds. */
  busyTimeoutMs?: number;
}

/** Opens (creating when needed) `<dataDir>/ocellus.db` in WAL mode with foreign keys on, and migrates it. */
export function openStore(dataDir: string, options: OpenStoreOptions = {}): Store {
  // Only the server's user reads the data: the database holds credentials' hashes and device reports.
  mkdirSync(dataDir, { recursive: true, mode: 0o700 });
  const dbPath = join(dataDir, 'ocellus.db');
  // Created (or tightened) 0600 before SQLite opens it; SQLite gives the -wal and -shm files the database's mode.
  closeSync(openSync(dbPath, 'a', 0o600));
  chmodSync(dbPath, 0o600);
  const db = new Database(dbPath);
  try {
    db.pragma('journal_mode = WAL');
    db.pragma('foreign_keys = ON');
    db.pragma(`busy_timeout = ${Math.max(0, Math.floor(options.busyTimeoutMs ?? 5000))}`);
    // With WAL, NORMAL keeps the database consistent after a crash and loses at most the last commits on power loss.
    db.pragma('synchronous = NORMAL');
    applyMigrations(db, options.migrations ?? defaultMigrations);
  } catch (e) {
    db.close();
    throw e;
  }
  const devices = createDeviceRepository(db, loadOrCreateDeviceSecretKey(dataDir));
  const hasTableStmt = db.prepare("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?");
  // Prepared once: cheaper than a nested transaction per item of a large batch.
  const savepoint = { begin: db.prepare('SAVEPOINT store_attempt'), release: db.prepare('RELEASE store_attempt'), undo: db.prepare('ROLLBACK TO store_attempt') };
  const has = (name: string) => hasTableStmt.get(name) !== undefined;

  const store: Store = {
    dataDir,
    location: db.name,
    documents: createDocumentRepository(db),
    profiles: createProfileRepository(db),
    releases: createReleaseRepository(db),
    devices,
    tokens: createTokenRepository(db),
    audit: createAuditRepository(db),
    deviceStates: createDeviceStateRepository(db),
    deviceEvents: createDeviceEventRepository(db),
    deviceEventEpochs: createDeviceEventEpochRepository(db),
    deviceConnections: createDeviceConnectionRepository(db),
    eventRanges: createEventRangeReader(db),
    rollouts: createRolloutRepository(db),
    rolloutFacts: createRolloutFactsRepository(db),
    drift: createDriftRepository(db),
    transaction: function transaction<T>(fn: () => T): T {
      // IMMEDIATE takes the write lock at BEGIN, where busy_timeout lets it wait for the event writer's connection;
      // a deferred transaction that reads and then writes cannot wait (SQLite returns SQLITE_BUSY at once).
      return db.transaction(fn).immediate();
    },
    verifyDeviceCredentials: function verifyDeviceCredentials(deviceId, password) {
      return devices.verifyCredentials(deviceId, password);
    },
    attempt: function attempt<T>(fn: () => T): Attempt<T> {
      if (!db.inTransaction) throw new Error('store.attempt runs only inside store.transaction');
      savepoint.begin.run();
      try {
        const value = fn();
        savepoint.release.run();
        return { ok: true, value };
      } catch (error) {
        // An error that made SQLite abandon the whole transaction leaves no savepoint to return to.
        if (!db.inTransaction) throw error;
        savepoint.undo.run();
        savepoint.release.run();
        return { ok: false, error };
      }
    },
    hasTable: has,
    isOpen: function isOpen() {
      return db.open;
    },
    close: function close() {
      if (db.open) db.close();
    },
  };
  registerSqliteHandle(store, db);
  return store;
}
