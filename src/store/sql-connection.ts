import type Database from 'better-sqlite3';

/** Which SQL the connection speaks. Repositories share one spelling and keep a second only where the dialects differ. */
export type SqlDialect = 'sqlite' | 'postgres';

/** A statement prepared once and run many times, synchronously, with `?` or `@name` parameters. */
export interface SqlStatement {
  /** The first row, or undefined. */
  get(...params: unknown[]): unknown;
  all(...params: unknown[]): unknown[];
  /** Runs a write; `changes` is how many rows it touched. */
  run(...params: unknown[]): { changes: number };
  /** From now on get/all return each row's first column instead of the row. */
  pluck(): SqlStatement;
}

/** The one connection a store's repositories share: SQLite through better-sqlite3, or PostgreSQL through a worker thread. */
export interface SqlConnection {
  readonly dialect: SqlDialect;
  /** The SQLite file path, or the PostgreSQL URL without its password. */
  readonly location: string;
  prepare(sql: string): SqlStatement;
  /** Runs one or more statements without parameters (migrations). */
  exec(sql: string): void;
  /** Runs `fn` in a transaction; a nested call becomes a savepoint inside the outer one. */
  transaction<T>(fn: () => T): T;
  readonly inTransaction: boolean;
  isOpen(): boolean;
  close(): void;
}

/** better-sqlite3's own statements already have this shape: no wrapper on the hot path. */
export function sqliteConnection(db: Database.Database): SqlConnection {
  return {
    dialect: 'sqlite',
    location: db.name,
    prepare: function prepare(sql) {
      return db.prepare(sql) as unknown as SqlStatement;
    },
    exec: function exec(sql) {
      db.exec(sql);
    },
    transaction: function transaction<T>(fn: () => T): T {
      // IMMEDIATE takes the write lock at BEGIN, where busy_timeout lets it wait for the event writer's connection;
      // a deferred transaction that reads and then writes cannot wait (SQLite returns SQLITE_BUSY at once).
      return db.transaction(fn).immediate();
    },
    get inTransaction() {
      return db.inTransaction;
    },
    isOpen: function isOpen() {
      return db.open;
    },
    close: function close() {
      if (db.open) db.close();
    },
  };
}
