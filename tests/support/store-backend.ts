// Which store backend a test file runs on. vitest.config.ts runs the store and API suites twice: once on SQLite
// (the default) and once with OCELLUS_TEST_BACKEND=postgres, where every store of a test file lives in one fresh
// database (CREATE DATABASE ocellus_test_<random>, dropped after the file), each data folder in a schema of its own.
import Database from 'better-sqlite3';
import { createHash, randomBytes } from 'node:crypto';
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll } from 'vitest';
import { openPgSyncConnection } from '../../src/store/pg-sync-connection.js';
import { sqliteConnection, type SqlConnection } from '../../src/store/sql-connection.js';
import { openStore, type OpenStoreOptions, type Store } from '../../src/store/index.js';

export type StoreBackend = 'sqlite' | 'postgres';

export const storeBackend: StoreBackend = process.env.OCELLUS_TEST_BACKEND === 'postgres' ? 'postgres' : 'sqlite';

/** The server the PostgreSQL runs use: the machine's own, trust auth, user postgres. */
export const postgresAdminUrl = process.env.OCELLUS_TEST_POSTGRES_URL ?? 'postgres://postgres@127.0.0.1:5432/postgres';

let fileDatabase: { name: string; url: string } | null = null;
/** One connection to this file's database for making schemas: a connection costs a worker thread and a login. */
let fileAdmin: SqlConnection | null = null;
const opened: Store[] = [];

function withDatabase(url: string, database: string, schema?: string): string {
  const u = new URL(url);
  u.pathname = `/${database}`;
  if (schema) u.searchParams.set('options', `-c search_path=${schema}`);
  return u.toString();
}

function admin<T>(fn: (c: SqlConnection) => T, database = 'postgres'): T {
  const c = openPgSyncConnection({ url: withDatabase(postgresAdminUrl, database), waitLimitMs: 30_000, applicationName: 'ocellus-tests' });
  try {
    return fn(c);
  } finally {
    c.close();
  }
}

/** This test file's own database, created on first use with C collation (the store refuses any other). */
function testDatabase(): { name: string; url: string } {
  if (fileDatabase) return fileDatabase;
  const name = `ocellus_test_${randomBytes(6).toString('hex')}`;
  admin((c) => c.exec(`CREATE DATABASE ${name} TEMPLATE template0 LC_COLLATE 'C' LC_CTYPE 'C'`));
  fileDatabase = { name, url: withDatabase(postgresAdminUrl, name) };
  return fileDatabase;
}

afterAll(() => {
  for (const s of opened.splice(0)) s.close();
  fileAdmin?.close();
  fileAdmin = null;
  if (!fileDatabase) return;
  const { name } = fileDatabase;
  fileDatabase = null;
  admin((c) => c.exec(`DROP DATABASE IF EXISTS ${name} WITH (FORCE)`));
});

/**
 * The PostgreSQL URL that stands for a data folder in this test file: the same folder gives the same schema,
 * so closing and reopening a store finds its rows, as the SQLite file in the folder would.
 */
export function postgresUrlFor(dataDir: string): string {
  const db = testDatabase();
  const schema = `store_${createHash('sha256').update(dataDir).digest('hex').slice(0, 16)}`;
  fileAdmin ??= openPgSyncConnection({ url: db.url, waitLimitMs: 30_000, applicationName: 'ocellus-tests' });
  fileAdmin.exec(`CREATE SCHEMA IF NOT EXISTS ${schema}`);
  return withDatabase(db.url, db.name, schema);
}

/** A fresh, empty PostgreSQL URL in this file's database (a new schema), for tests that migrate by hand. */
export function freshPostgresUrl(): string {
  return postgresUrlFor(`fresh-${randomBytes(8).toString('hex')}`);
}

/** openStore on the backend this run tests; on PostgreSQL the data folder still holds the keys. */
export function openTestStore(dataDir: string, options: OpenStoreOptions = {}): Store {
  if (storeBackend === 'sqlite') return openStore(dataDir, options);
  const store = openStore(dataDir, { ...options, databaseUrl: postgresUrlFor(dataDir) });
  opened.push(store);
  return store;
}

/**
 * A bare connection to where openTestStore(dataDir) keeps its rows, with no migrations applied: for tests that
 * build an older schema by hand (a store cannot open one: its repositories prepare statements for the newest).
 */
export function openTestConnection(dataDir: string): SqlConnection {
  if (storeBackend === 'sqlite') {
    mkdirSync(dataDir, { recursive: true });
    return sqliteConnection(new Database(join(dataDir, 'ocellus.db')));
  }
  return openPgSyncConnection({ url: postgresUrlFor(dataDir), applicationName: 'ocellus-tests' });
}
