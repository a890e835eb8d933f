import { migrations, type Migration } from './migrations.js';
import type { SqlConnection } from './sql-connection.js';

// Any constant: the key of the advisory lock that lets one process at a time migrate a PostgreSQL database.
const MIGRATION_LOCK_KEY = 7_402_116;

/**
 * Applies every migration newer than the database, each in its own transaction, and returns the versions
 * applied. Refuses a database that records a version this code does not know (written by newer code).
 * On PostgreSQL each step holds an advisory lock and re-reads what is applied, so replicas starting
 * together migrate once.
 */
export function applyMigrations(db: SqlConnection, list: readonly Migration[] = migrations): number[] {
  list.forEach((m, i) => {
    if (i > 0 && m.version <= list[i - 1]!.version) {
      throw new Error(`migration ${m.version} (${m.name}) is out of order: versions must strictly increase`);
    }
  });
  const postgres = db.dialect === 'postgres';
  const lock = postgres ? db.prepare(`SELECT pg_advisory_xact_lock(${MIGRATION_LOCK_KEY})`) : null;
  db.transaction(() => {
    lock?.get();
    db.exec(`CREATE TABLE IF NOT EXISTS schema_migrations (
      version ${postgres ? 'bigint' : 'INTEGER'} PRIMARY KEY, name TEXT NOT NULL, applied_at TEXT NOT NULL)`);
  });
  const appliedNow = () => new Set(db.prepare('SELECT version FROM schema_migrations').pluck().all() as number[]);
  const known = new Set(list.map((m) => m.version));
  const unknown = [...appliedNow()].filter((v) => !known.has(v)).sort((a, b) => a - b);
  const newest = list.at(-1)?.version ?? 0;
  if (unknown.some((v) => v > newest)) {
    throw new Error(`the database at ${db.location} has schema version ${unknown.at(-1)}, newer than this program knows (up to ${newest}): run the newer program, or restore a backup`);
  }
  if (unknown.length > 0) throw new Error(`the database at ${db.location} records migration(s) ${unknown.join(', ')} that this program does not have`);
  const record = db.prepare('INSERT INTO schema_migrations (version, name, applied_at) VALUES (?, ?, ?)');
  const done: number[] = [];
  for (const m of list) {
    db.transaction(() => {
      lock?.get();
      if (appliedNow().has(m.version)) return;
      db.exec(postgres ? m.postgres : m.sql);
      record.run(m.version, m.name, new Date().toISOString());
      done.push(m.version);
    });
  }
  return done;
}
