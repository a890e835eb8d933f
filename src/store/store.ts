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
import { createLeaderLeaseRepository, type LeaderLeaseRepository } from './leader-leases.js';
import { applyMigrations } from './apply-migrations.js';
import { migrations as defaultMigrations, type Migration } from './migrations.js';
import { createProfileRepository, type ProfileRepository } from './profiles.js';
import { createReleaseRepository, type ReleaseRepository } from './releases.js';
import { createRolloutFactsRepository, type RolloutFactsRepository } from './rollout-facts.js';
import { createRolloutRepository, type RolloutRepository } from './rollouts.js';
import { openPgSyncConnection } from './pg-sync-connection.js';
import { sqliteConnection, type SqlConnection } from './sql-connection.js';
import { registerSqlHandle } from './sqlite-handle.js';
import { createTokenRepository, type TokenRepository } from './tokens.js';

/** What a savepoint gave back: the function's value, or the error it threw (its writes undone). */
export type Attempt<T> = { ok: true; value: T } | { ok: false; error: unknown };

export interface Store {
  readonly dataDir: string;
  /**
   * Where the database lives, for a second connection such as the event writer's: the SQLite file path, or the
   * PostgreSQL URL as given (it may hold a password: never log it).
   */
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
  /** Leases that let one replica at a time run the fleet's engines (src/fleet/leader-lock.ts). */
  readonly leaderLeases: LeaderLeaseRepository;
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
  /**
   * A postgres:// (or postgresql://) URL: the store lives in that PostgreSQL database instead of
   * `<dataDir>/ocellus.db`. The data folder still holds the keys and the weights blobs.
   */
  databaseUrl?: string;
}

/** True for a URL openStore reads as a PostgreSQL database. */
export function isPostgresUrl(location: string): boolean {
  return /^postgres(ql)?:\/\//i.test(location);
}

/** Opens (creating when needed) `<dataDir>/ocellus.db` in WAL mode with foreign keys on, and migrates it. */
function openSqlite(dataDir: string, options: OpenStoreOptions): { conn: SqlConnection; raw: Database.Database } {
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
  } catch (e) {
    db.close();
    throw e;
  }
  return { conn: sqliteConnection(db), raw: db };
}

/**
 * Opens the PostgreSQL database at `url` on one connection. Text must order as in SQLite (by code point), so a
 * database whose default collation is not C (or C.UTF-8 / POSIX) is refused: its ORDER BY on ids would differ.
 */
function openPostgres(url: string, options: OpenStoreOptions): SqlConnection {
  const conn = openPgSyncConnection({ url, ...(options.busyTimeoutMs !== undefined ? { statementTimeoutMs: Math.max(1000, options.busyTimeoutMs * 6) } : {}) });
  try {
    // to_jsonb reads the ICU columns where they exist (PostgreSQL 15+) and gives null on older servers.
    const db = conn.prepare(`SELECT datcollate AS collate, to_jsonb(d) ->> 'datlocprovider' AS provider, to_jsonb(d) ->> 'daticulocale' AS icu
      FROM pg_database d WHERE datname = current_database()`).get() as { collate: string; provider: string | null; icu: string | null };
    const collation = db.provider === 'i' ? `ICU ${db.icu ?? '(unknown)'}` : db.collate;
    if (db.provider === 'i' || !/^(C|POSIX|C\.UTF-?8)$/i.test(db.collate)) {
      throw new Error(`the PostgreSQL database at ${conn.location} sorts text by collation ${collation}; Ocellus needs C or C.UTF-8 (create it with: CREATE DATABASE … TEMPLATE template0 LC_COLLATE 'C' LC_CTYPE 'C')`);
    }
  } catch (e) {
    conn.close();
    throw e;
  }
  return conn;
}

/**
 * Opens the store and migrates it: a SQLite file in the data folder (the default), or the PostgreSQL database
 * of `options.databaseUrl`. Either way the data folder is created 0700 and holds the device secret key.
 */
export function openStore(dataDir: string, options: OpenStoreOptions = {}): Store {
  // Only the server's user reads the data: the database holds credentials' hashes and device reports.
  mkdirSync(dataDir, { recursive: true, mode: 0o700 });
  const url = options.databaseUrl;
  if (url !== undefined && !isPostgresUrl(url)) throw new Error(`--database expects a postgres:// or postgresql:// URL, got ${JSON.stringify(url.slice(0, 40))}`);
  const sqlite = url === undefined ? openSqlite(dataDir, options) : null;
  const db = sqlite ? sqlite.conn : openPostgres(url!, options);
  try {
    applyMigrations(db, options.migrations ?? defaultMigrations);
  } catch (e) {
    db.close();
    throw e;
  }
  const devices = createDeviceRepository(db, loadOrCreateDeviceSecretKey(dataDir));
  const hasTableStmt = db.dialect === 'postgres'
    ? db.prepare("SELECT 1 FROM information_schema.tables WHERE table_schema = current_schema() AND table_name = ?")
    : db.prepare("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?");
  // Prepared once: cheaper than a nested transaction per item of a large batch.
  const savepoint = { begin: db.prepare('SAVEPOINT store_attempt'), release: db.prepare('RELEASE store_attempt'), undo: db.prepare('ROLLBACK TO store_attempt') };
  const has = (name: string) => hasTableStmt.get(name) !== undefined;

  const store: Store = {
    dataDir,
    location: url ?? db.location,
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
    leaderLeases: createLeaderLeaseRepository(db),
    transaction: function transaction<T>(fn: () => T): T {
      return db.transaction(fn);
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
      return db.isOpen();
    },
    close: function close() {
      db.close();
    },
  };
  registerSqlHandle(store, db, sqlite?.raw);
  return store;
}
