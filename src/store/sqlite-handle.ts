import type Database from 'better-sqlite3';
import type { SqlConnection } from './sql-connection.js';

const handles = new WeakMap<object, SqlConnection>();
const sqliteDbs = new WeakMap<object, Database.Database>();

/** Called by openStore: remembers the connection behind a store. */
export function registerSqlHandle(store: object, conn: SqlConnection, sqlite?: Database.Database): void {
  handles.set(store, conn);
  if (sqlite) sqliteDbs.set(store, sqlite);
}

/**
 * The connection behind a store opened by openStore, on either backend (prepare → get/all/run/pluck, with `?`
 * parameters). Only for tests and benchmarks that look at rows directly or seed them in bulk; the product reads
 * and writes through the store's repositories.
 */
export function sqlHandle(store: object): SqlConnection {
  const conn = handles.get(store);
  if (!conn) throw new Error('this store was not opened by openStore (no connection behind it)');
  return conn;
}

/** The better-sqlite3 connection behind a SQLite store (pragmas, checkpoints); throws for a PostgreSQL store. */
export function sqliteHandle(store: object): Database.Database {
  const db = sqliteDbs.get(store);
  if (!db) throw new Error(handles.has(store) ? 'this store is on PostgreSQL (no SQLite connection behind it)' : 'this store was not opened by openStore (no SQLite connection behind it)');
  return db;
}
