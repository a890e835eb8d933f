import { createHash } from 'node:crypto';
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { applyMigrations, createBlobStore, loadOrCreateSigningKey, migrations } from '../../src/store/index.js';
import { generateSigningKeyPair } from '../../src/protocol/signing.js';
import { sqlHandle, sqliteHandle } from '../../src/store/sqlite-handle.js';
import { openTestStore, storeBackend } from '../support/store-backend.js';
import { storeFolders } from '../support/store-folders.js';

const { tempDir, open } = storeFolders('store');

const at = '2025-03-01T10:00:00.000Z';

describe('opening the store', () => {
  it.runIf(storeBackend === 'sqlite')('uses WAL with foreign keys on', () => {
    const s1 = open(tempDir());
    expect(sqliteHandle(s1).pragma('journal_mode', { simple: true })).toBe('wal');
    expect(sqliteHandle(s1).pragma('foreign_keys', { simple: true })).toBe(1);
  });

  it('records each migration once across reopenings', () => {
    const dir = tempDir();
    open(dir).close();
    const s2 = open(dir);
    const rows = sqlHandle(s2).prepare('SELECT version FROM schema_migrations ORDER BY version').all();
    expect(rows).toEqual(migrations.map((m) => ({ version: m.version })));
    expect(applyMigrations(sqlHandle(s2))).toEqual([]);
  });

  it('refuses a migration list whose versions do not increase', () => {
    const dir = tempDir();
    expect(() => openTestStore(dir, { migrations: [{ version: 2, name: 'b', sql: '', postgres: '' }, { version: 1, name: 'a', sql: '', postgres: '' }] })).toThrow(/out of order/);
  });

  it('applies a failing migration not at all', () => {
    const dir = tempDir();
    const bad = [{ version: 1, name: 'half', sql: 'CREATE TABLE a (x); CREATE TABLE a (y);', postgres: 'CREATE TABLE a (x int); CREATE TABLE a (y int);' }];
    expect(() => openTestStore(dir, { migrations: bad })).toThrow(/already exists/);
    const s = open(dir);
    expect(s.hasTable('a')).toBe(false);
  });
});

describe('documents with history', () => {
  it('keeps every version readable and lists the latest', () => {
    const s = open(tempDir());
    expect(s.documents.create('task', 'pick', { v: 1 }, 'eng', at)?.version).toBe(1);
    expect(s.documents.create('task', 'pick', { v: 9 }, 'eng', at)).toBeNull();
    expect(s.documents.update('task', 'pick', { v: 2 }, 'eng', at)?.version).toBe(2);
    expect(s.documents.update('task', 'nope', { v: 2 }, 'eng', at)).toBeNull();
    expect(s.documents.history('task', 'pick').map((r) => r.document)).toEqual([{ v: 1 }, { v: 2 }]);
    expect(s.documents.version('task', 'pick', 1)?.document).toEqual({ v: 1 });
    expect(s.documents.list('task').map((r) => [r.id, r.version])).toEqual([['pick', 2]]);
    expect(s.documents.list('model')).toEqual([]);
  });

  it('rolls a transaction back whole when it fails part way', () => {
    const s = open(tempDir());
    expect(() =>
      s.transaction(() => {
        s.documents.create('task', 'a', {}, 'eng', at);
        s.audit.record({ at, actor: 'eng', action: 'task.create', target: 'task/a', detail: null });
        throw new Error('boom');
      }),
    ).toThrow('boom');
    expect(s.documents.latest('task', 'a')).toBeNull();
    expect(s.audit.query()).toEqual([]);
  });
});

describe('secrets at rest', () => {
  it('stores device passwords as keyed hashes (HMAC-SHA256) and verifies them', () => {
    const dir = tempDir();
    const s = open(dir);
    const a = s.devices.enrol({ id: 'gh-01', deviceClassId: 'cam', tags: ['row-1'], actor: 'op', at })!;
    const b = s.devices.enrol({ id: 'gh-02', deviceClassId: 'cam', tags: [], actor: 'op', at })!;
    expect(s.devices.enrol({ id: 'gh-01', deviceClassId: 'cam', tags: [], actor: 'op', at })).toBeNull();
    expect(s.verifyDeviceCredentials('gh-01', a.password)).toBe(true);
    expect(s.verifyDeviceCredentials('gh-01', b.password)).toBe(false);
    expect(s.verifyDeviceCredentials('gh-01', a.password)).toBe(true);
    expect(s.verifyDeviceCredentials('gh-01', `${a.password}x`)).toBe(false);
    expect(s.verifyDeviceCredentials('gh-99', a.password)).toBe(false);
    const hashes = sqlHandle(s).prepare('SELECT password_hash FROM devices').all() as Array<{ password_hash: string }>;
    expect(hashes.every((h) => h.password_hash.startsWith('hmac-sha256$'))).toBe(true);
    expect(hashes[0]!.password_hash).not.toContain(a.password);
    if (storeBackend === 'sqlite') {
      sqliteHandle(s).pragma('wal_checkpoint(TRUNCATE)');
      expect(readFileSync(join(dir, 'ocellus.db')).includes(Buffer.from(a.password))).toBe(false);
    }
  });

  it('stores bearer tokens as sha256 and stops accepting a revoked one', () => {
    const s = open(tempDir());
    const { token, secret } = s.tokens.create({ role: 'engineer', label: 'ci', actor: 'admin', at });
    const stored = sqlHandle(s).prepare('SELECT hash FROM tokens').get() as { hash: string };
    expect(stored.hash).toBe(createHash('sha256').update(secret).digest('hex'));
    expect(s.tokens.authenticate(secret)?.role).toBe('engineer');
    expect(s.tokens.revoke(token.id, at)?.revokedAt).toBe(at);
    expect(s.tokens.authenticate(secret)).toBeNull();
    expect(s.tokens.exists(secret)).toBe(true);
  });
});

describe('assignments and audit', () => {
  it('refuses an assignment to a release that does not exist (foreign key)', () => {
    const s = open(tempDir());
    s.devices.enrol({ id: 'gh-01', deviceClassId: 'cam', tags: [], actor: 'op', at });
    expect(() => s.devices.assign({ deviceId: 'gh-01', releaseId: 'missing', cause: 'manual', actor: 'op', at })).toThrow(/foreign key/i);
  });

  it('filters audit entries by actor, action, target and time, newest first', () => {
    const s = open(tempDir());
    s.audit.record({ at: '2025-01-01T00:00:00.000Z', actor: 'ann', action: 'task.create', target: 'task/a', detail: { x: 1 } });
    s.audit.record({ at: '2025-01-02T00:00:00.000Z', actor: 'bob', action: 'task.update', target: 'task/a', detail: null });
    s.audit.record({ at: '2025-01-03T00:00:00.000Z', actor: 'ann', action: 'task.create', target: 'task/b', detail: null });
    expect(s.audit.query({ actor: 'ann' }).map((e) => e.target)).toEqual(['task/b', 'task/a']);
    expect(s.audit.query({ target: 'task/a', action: 'task.update' }).map((e) => e.actor)).toEqual(['bob']);
    expect(s.audit.query({ from: '2025-01-02T00:00:00.000Z', to: '2025-01-02T23:59:59.999Z' }).length).toBe(1);
    expect(s.audit.query({ limit: 1 }).length).toBe(1);
    expect(s.audit.query({ actor: 'ann' })[1]!.detail).toEqual({ x: 1 });
  });
});

describe('content-addressed weights', () => {
  const bytes = Buffer.from('demo data: weights of a greenhouse fruit detector');
  const sha = createHash('sha256').update(bytes).digest('hex');

  it('keeps content under blobs/sha256/<2>/<hash> only after the hash matches', async () => {
    const dir = tempDir();
    const blobs = createBlobStore(dir);
    const r = await blobs.put(Readable.from([bytes.subarray(0, 10), bytes.subarray(10)]), { sha256: sha, maxBytes: 1000, sizeBytes: bytes.length });
    expect(r).toEqual({ ok: true, sha256: sha, sizeBytes: bytes.length });
    expect(readFileSync(join(dir, 'blobs', 'sha256', sha.slice(0, 2), sha))).toEqual(bytes);
    expect(blobs.sizeOf(sha)).toBe(bytes.length);
    expect(readdirSync(join(dir, 'blobs', 'tmp'))).toEqual([]);
  });

  it('leaves nothing behind on a hash mismatch or an oversized upload', async () => {
    const dir = tempDir();
    const blobs = createBlobStore(dir);
    const wrong = 'a'.repeat(64);
    expect(await blobs.put(Readable.from([bytes]), { sha256: wrong, maxBytes: 1000 })).toMatchObject({ ok: false, reason: 'hash-mismatch' });
    expect(await blobs.put(Readable.from([bytes]), { sha256: sha, maxBytes: 8 })).toMatchObject({ ok: false, reason: 'too-large' });
    expect(await blobs.put(Readable.from([bytes]), { sha256: sha, maxBytes: 1000, sizeBytes: 3 })).toMatchObject({ ok: false, reason: 'over-declared-size' });
    expect(await blobs.put(Readable.from([bytes]), { sha256: sha, maxBytes: 1000, sizeBytes: bytes.length + 5 })).toMatchObject({ ok: false, reason: 'size-mismatch' });
    expect(blobs.sizeOf(sha)).toBeNull();
    expect(blobs.sizeOf(wrong)).toBeNull();
    expect(readdirSync(join(dir, 'blobs', 'tmp'))).toEqual([]);
    expect(readdirSync(join(dir, 'blobs', 'sha256'))).toEqual([]);
  });
});

describe('signing key file', () => {
  it('is written once with mode 0600 and read back the same on the next start', () => {
    const dir = tempDir();
    const first = loadOrCreateSigningKey(dir, generateSigningKeyPair);
    const second = loadOrCreateSigningKey(dir, () => {
      throw new Error('must not generate again');
    });
    expect(second.publicKeyPem).toBe(first.publicKeyPem);
    expect(statSync(first.path).mode & 0o777).toBe(0o600);
  });
});
