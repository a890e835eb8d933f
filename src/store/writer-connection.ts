import Database from 'better-sqlite3';

/**
 * A second connection to the server's (already migrated) database for the event writer, with the
 * store's settings: WAL, foreign keys, a busy timeout for the moments the main connection writes, and
 * synchronous = NORMAL. In WAL mode NORMAL keeps every commit across a crash of the process (the
 * commit is in the WAL file before the ack is sent) and the database consistent across a power cut,
 * where the last commits before the WAL's next sync may be lost (SQLite documentation, "PRAGMA synchronous").
 */
export function openWriterConnection(dbPath: string, busyTimeoutMs: number): Database.Database {
  const db = new Database(dbPath, { fileMustExist: true });
  db.pragma('journal_mode = WAL');
  db.pragma('foreign_keys = ON');
  db.pragma(`busy_timeout = ${Math.max(0, Math.floor(busyTimeoutMs))}`);
  db.pragma('synchronous = NORMAL');
  return db;
}
