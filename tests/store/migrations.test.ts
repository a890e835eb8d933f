import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { applyMigrations, migrations, type Migration, type Store } from '../../src/store/index.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';
import { openTestConnection, openTestStore, storeBackend } from '../support/store-backend.js';

// Runs on both backends (vitest projects 'sqlite' and 'postgres'): the same numbered migrations, each
// spelled for SQLite and for PostgreSQL, must leave the same tables and keep the rows of an older schema.
const dirs: string[] = [];
const stores: Store[] = [];
function tempDir(): string {
  const d = mkdtempSync(join(tmpdir(), 'ocellus-migrate-'));
  dirs.push(d);
  return d;
}
function open(dir: string, list?: readonly Migration[]): Store {
  const s = openTestStore(dir, list ? { migrations: list } : {});
  stores.push(s);
  return s;
}
afterEach(() => {
  for (const s of stores.splice(0)) s.close();
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

const at = '2026-04-02T06:00:00.000Z';
const TABLES = ['documents', 'profile_revisions', 'releases', 'devices', 'assignments', 'tokens', 'audit', 'device_state', 'device_events',
  'device_event_cursor', 'rollouts', 'rollout_devices', 'drift_events', 'device_connections', 'device_event_epochs'];

describe(`migrations on ${storeBackend}`, () => {
  it('on an empty database create every table and record each version once', () => {
    const s = open(tempDir());
    for (const t of TABLES) expect(s.hasTable(t), t).toBe(true);
    expect(s.hasTable('no_such_table')).toBe(false);
    expect(sqlHandle(s).prepare('SELECT version FROM schema_migrations ORDER BY version').pluck().all()).toEqual(migrations.map((m) => m.version));
  });

  it('on a database left at the previous version apply only the last one and keep the rows', () => {
    const dir = tempDir();
    const previous = migrations.slice(0, -1);
    const last = migrations.at(-1)!;
    // The older schema and its rows, written as the code of that version wrote them.
    const old = openTestConnection(dir);
    expect(applyMigrations(old, previous)).toEqual(previous.map((m) => m.version));
    old.prepare('INSERT INTO devices (id, device_class_id, tags, password_hash, assigned_release_id, created_at, created_by) VALUES (?, ?, ?, ?, NULL, ?, ?)')
      .run('gh-m-01', 'bench-cam', '["row-3"]', 'hmac-sha256$x', at, 'op');
    old.prepare('INSERT INTO documents (kind, id, version, body, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)').run('task', 'pick-tomato', 1, '{"note":"demo data"}', at, 'eng');
    old.prepare('INSERT INTO device_events (device_id, seq, ts, type, event, received_at) VALUES (?, ?, ?, ?, ?, ?)').run('gh-m-01', 1, at, 'telemetry', '{"type":"telemetry","seq":1}', at);
    old.close();

    const s = open(dir);
    expect(sqlHandle(s).prepare('SELECT version FROM schema_migrations ORDER BY version').pluck().all()).toEqual(migrations.map((m) => m.version));
    expect(sqlHandle(s).prepare('SELECT name FROM schema_migrations WHERE version = ?').pluck().get(last.version)).toBe(last.name);
    expect(s.devices.get('gh-m-01')?.tags).toEqual(['row-3']);
    expect(s.documents.latest('task', 'pick-tomato')?.version).toBe(1);
    expect(s.deviceEvents.count('gh-m-01')).toBe(1);
    // Whatever the last migration added is there beside the old rows.
    for (const t of TABLES) expect(s.hasTable(t), t).toBe(true);
  });

  it('refuse a database written by newer code, and change nothing', () => {
    const dir = tempDir();
    const newer: Migration = { version: 99, name: 'from a later release', sql: 'CREATE TABLE later (x INTEGER)', postgres: 'CREATE TABLE later (x bigint)' };
    open(dir, [...migrations, newer]).close();
    expect(() => open(dir)).toThrow(`schema version 99, newer than this program knows (up to ${migrations.at(-1)!.version})`);
    const again = open(dir, [...migrations, newer]);
    expect(again.hasTable('later')).toBe(true);
  });

  it.runIf(storeBackend === 'postgres')('read a 64-bit integer beyond 2^53 as an error, never as a different number', () => {
    const s = open(tempDir());
    // 2^53 + 1 = 9007199254740993 has no exact double: a plain Number() would give 9007199254740992.
    sqlHandle(s).prepare('INSERT INTO device_events (device_id, seq, ts, type, event, received_at) VALUES (?, ?, ?, ?, ?, ?)')
      .run('gh-m-02', '9007199254740993', at, 'telemetry', '{}', at);
    expect(() => s.deviceEvents.seqsAbove('gh-m-02', 0)).toThrow(/9007199254740993, beyond the integers JavaScript keeps exactly/);
  });
});
