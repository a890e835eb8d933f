import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { openPgSyncConnection } from '../../src/store/pg-sync-connection.js';
import { openStore, type Store } from '../../src/store/index.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';
import { freshPostgresUrl, openTestStore, storeBackend } from '../support/store-backend.js';

// The synchronous PostgreSQL connection: transactions, savepoints and errors on its one connection must behave
// as better-sqlite3's do, since the store's callers were written against those. PostgreSQL project only.
const dirs: string[] = [];
const stores: Store[] = [];
function open(): Store {
  const d = mkdtempSync(join(tmpdir(), 'ocellus-pgsync-'));
  dirs.push(d);
  const s = openTestStore(d);
  stores.push(s);
  return s;
}
afterEach(() => {
  for (const s of stores.splice(0)) s.close();
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});
const at = '2026-05-04T07:30:00.000Z';

describe.runIf(storeBackend === 'postgres')('the synchronous PostgreSQL connection', () => {
  it('undoes only a failed savepoint inside a transaction, and the transaction carries on', () => {
    const s = open();
    s.transaction(() => {
      s.audit.record({ at, actor: 'op', action: 'token.create', target: 'token/1', detail: null });
      const failed = s.attempt(() => {
        s.audit.record({ at, actor: 'op', action: 'token.revoke', target: 'token/1', detail: null });
        sqlHandle(s).prepare('SELECT no_such_column FROM audit').get();
      });
      expect(failed.ok).toBe(false);
      expect(String((failed as { error: unknown }).error)).toMatch(/column "no_such_column" does not exist \[PostgreSQL 42703\] in: SELECT no_such_column FROM audit/);
      // After an error PostgreSQL refuses every statement of the transaction unless a savepoint took it back.
      s.audit.record({ at, actor: 'op', action: 'token.create', target: 'token/2', detail: null });
    });
    expect(s.audit.query().map((e) => e.target)).toEqual(['token/2', 'token/1']);
  });

  it('makes a nested transaction a savepoint: its failure undoes its own writes and reaches the caller', () => {
    const s = open();
    s.transaction(() => {
      s.audit.record({ at, actor: 'op', action: 'a.outer', target: 'x/1', detail: null });
      expect(() => s.transaction(() => {
        s.audit.record({ at, actor: 'op', action: 'a.inner', target: 'x/2', detail: null });
        throw new Error('inner refused');
      })).toThrow('inner refused');
    });
    expect(s.audit.query().map((e) => e.action)).toEqual(['a.outer']);
  });

  it('refuses an async function as a transaction and leaves nothing of it', () => {
    const s = open();
    expect(() => s.transaction((async () => {
      s.audit.record({ at, actor: 'op', action: 'a.async', target: 'x/1', detail: null });
    }) as unknown as () => void)).toThrow(/cannot be an async function/);
    expect(s.audit.query()).toEqual([]);
  });

  it('answers a statement on a closed store with an error naming the database, not a hang', () => {
    const s = open();
    s.close();
    expect(s.isOpen()).toBe(false);
    expect(() => s.tokens.count()).toThrow(/PostgreSQL connection to postgres:\/\/.* is closed/);
  });

  it('fails to open, plainly, when nothing listens at the URL', () => {
    // Port 1 on loopback: refused at once on Linux.
    expect(() => openPgSyncConnection({ url: 'postgres://postgres@127.0.0.1:1/none', waitLimitMs: 20_000 })).toThrow(/ECONNREFUSED/);
  });

  it('refuses a database that does not sort text by code point (an ICU en-US one), naming its collation', () => {
    const url = new URL(freshPostgresUrl());
    const name = `ocellus_test_collate_${Date.now().toString(36)}`;
    const admin = openPgSyncConnection({ url: url.toString() });
    // ICU collations ship with Debian's PostgreSQL 15, whatever OS locales are installed.
    admin.exec(`CREATE DATABASE ${name} TEMPLATE template0 LOCALE_PROVIDER icu ICU_LOCALE 'en-US' LOCALE 'C'`);
    try {
      url.pathname = `/${name}`;
      url.search = '';
      const dir = mkdtempSync(join(tmpdir(), 'ocellus-pgsync-'));
      dirs.push(dir);
      expect(() => openStore(dir, { databaseUrl: url.toString() })).toThrow(/sorts text by collation ICU en-US; Ocellus needs C or C\.UTF-8/);
    } finally {
      admin.exec(`DROP DATABASE IF EXISTS ${name} WITH (FORCE)`);
      admin.close();
    }
  });
});
