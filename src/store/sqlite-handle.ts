import type Database from 'better-sqlite3';

const handles = new WeakMap<object, Database.Database>();

/** Called by openStore: remembers the connection behind a store. */
export function registerSqliteHandle(store: object, db: Database.Database): void {
  handles.set(store, db);
}

/**
 * The SQLite connection behind a store opened by openStore. Only for tests and benchmarks that look at the
 * file's rows directly or seed it in bulk; the product reads and writes through the store's repositories.
 */
export function sqliteHandle(store: object): Database.Database {
  const db = handles.get(store);
  if (!db) throw new Error('this store was not opened by openStore (no SQLite connection behind it)');
  return db;
}
