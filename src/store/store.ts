import Database from 'better-sqlite3';
import { chmodSync, closeSync, mkdirSync, openSync } from 'node:fs';
import { join } from 'node:path';
import { createAuditRepository, type AuditRepository } from './audit.js';
import { loadOrCreateDeviceSecretKey } from './device-secret-key.js';
import { createDeviceRepository, type DeviceRepository } from './devices.js';
import { createDocumentRepository, type DocumentRepository } from './documents.js';
import { applyMigrations, migrations as defaultMigrations, type Migration } from './migrations.js';
import { createProfileRepository, type ProfileRepository } from './profiles.js';
import { createReleaseRepository, type ReleaseRepository } from './releases.js';
import { createTokenRepository, type TokenRepository } from './tokens.js';

export interface Store {
  readonly dataDir: string;
  /** The open database, for repositories added by other parts of the server (device state, events, rollouts). */
  readonly db: Database.Database;
  readonly documents: DocumentRepository;
  readonly profiles: ProfileRepository;
  readonly releases: ReleaseRepository;
  readonly devices: DeviceRepository;
  readonly tokens: TokenRepository;
  readonly audit: AuditRepository;
  /** Runs `fn` in one transaction: every write in it lands, or none does. Nested calls join the outer one. */
  transaction<T>(fn: () => T): T;
  /** For the broker's authentication: an enrolled device with a matching MQTT password. */
  verifyDeviceCredentials(deviceId: string, password: string): boolean;
  /** True when the database has a table of that name (lets readers use optional tables of other parts). */
  hasTable(name: string): boolean;
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

  return {
    dataDir,
    db,
    documents: createDocumentRepository(db),
    profiles: createProfileRepository(db),
    releases: createReleaseRepository(db),
    devices,
    tokens: createTokenRepository(db),
    audit: createAuditRepository(db),
    transaction: function transaction<T>(fn: () => T): T {
      return db.transaction(fn)();
    },
    verifyDeviceCredentials: function verifyDeviceCredentials(deviceId, password) {
      return devices.verifyCredentials(deviceId, password);
    },
    hasTable: function hasTable(name) {
      return hasTableStmt.get(name) !== undefined;
    },
    close: function close() {
      if (db.open) db.close();
    },
  };
}
