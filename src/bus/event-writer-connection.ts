import Database from 'better-sqlite3';

/**
 * A second connection to the server's (already migrated) database for the event writer, with the
 * store's settings (WAL, foreign keys, a busy timeout for the moments the main connection writes) except
 * synchronous = FULL. Its commits precede the acks that let devices drop their events, so each must be on
 * disk before the ack: in WAL mode NORMAL survives a crash of the process but may lose the last commits on a
 * power cut, while FULL syncs the WAL at every commit (SQLite documentation, "PRAGMA synchronous").
 */
export function openWriterConnection(dbPath: string, busyTimeoutMs: number): Database.Database {
  const db = new Database(dbPath, { fileMustExist: true });
  db.pragma('journal_mode = WAL');
  db.pragma('foreign_keys = ON');
  db.pragma(`busy_timeout = ${Math.max(0, Math.floor(busyTimeoutMs))}`);
  db.pragma('synchronous = FULL');
  return db;
}
