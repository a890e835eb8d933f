import { createHmac } from 'node:crypto';
import { mkdirSync, readdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { createBlobStore, hashPassword, TMP_SWEEP_AGE_MS } from '../../src/store/index.js';
import { createLoginGuard } from '../../src/store/login-guard.js';
import { sqlHandle, sqliteHandle } from '../../src/store/sqlite-handle.js';
import { storeBackend } from '../support/store-backend.js';
import { storeFolders } from '../support/store-folders.js';

const { tempDir, open } = storeFolders('cred');
const at = '2026-03-01T10:00:00.000Z';

describe('device secrets at rest', () => {
  it('are HMAC-SHA256 (RFC 2104) under the server key in device-secret-key, a 32-byte file of mode 0600', () => {
    const dir = tempDir();
    const s = open(dir);
    const { password } = s.devices.enrol({ id: 'gh-a-01', deviceClassId: 'cam', tags: [], actor: 'op', at })!;
    // 24 random bytes in base64url: a 192-bit secret.
    expect(Buffer.from(password, 'base64url').length).toBe(24);
    const keyPath = join(dir, 'device-secret-key');
    expect(statSync(keyPath).mode & 0o777).toBe(0o600);
    const key = readFileSync(keyPath);
    expect(key.length).toBe(32);
    const stored = sqlHandle(s).prepare('SELECT password_hash FROM devices').pluck().get() as string;
    expect(stored).toBe(`hmac-sha256$${createHmac('sha256', key).update(password).digest('base64')}`);
  });

  it('a legacy scrypt hash is checked off the event loop once, then replaced by the keyed hash', async () => {
    const s = open(tempDir());
    s.devices.enrol({ id: 'gh-a-01', deviceClassId: 'cam', tags: [], actor: 'op', at });
    const legacy = 'old-secret-from-an-earlier-version';
    sqlHandle(s).prepare('UPDATE devices SET password_hash = ? WHERE id = ?').run(hashPassword(legacy), 'gh-a-01');
    // The synchronous check never runs scrypt: it refuses a legacy hash.
    expect(s.devices.verifyCredentials('gh-a-01', legacy)).toBe(false);
    expect(await s.devices.checkLogin('gh-a-01', 'wrong')).toEqual({ ok: false, reason: 'bad-credentials' });
    expect((sqlHandle(s).prepare('SELECT password_hash FROM devices').pluck().get() as string).startsWith('scrypt$')).toBe(true);
    expect(await s.devices.checkLogin('gh-a-01', legacy)).toEqual({ ok: true });
    expect((sqlHandle(s).prepare('SELECT password_hash FROM devices').pluck().get() as string).startsWith('hmac-sha256$')).toBe(true);
    expect(s.devices.verifyCredentials('gh-a-01', legacy)).toBe(true);
  });

  it('rotation replaces the secret; revocation refuses it until the next rotation', async () => {
    const s = open(tempDir());
    const first = s.devices.enrol({ id: 'gh-a-01', deviceClassId: 'cam', tags: [], actor: 'op', at })!;
    const rotated = s.devices.rotatePassword('gh-a-01')!;
    expect(rotated.password).not.toBe(first.password);
    expect(await s.devices.checkLogin('gh-a-01', first.password)).toEqual({ ok: false, reason: 'bad-credentials' });
    expect(await s.devices.checkLogin('gh-a-01', rotated.password)).toEqual({ ok: true });
    expect(s.devices.revoke('gh-a-01', at)?.revokedAt).toBe(at);
    expect(s.devices.revoke('gh-a-01', '2026-03-02T00:00:00.000Z')?.revokedAt).toBe(at);
    expect(await s.devices.checkLogin('gh-a-01', rotated.password)).toEqual({ ok: false, reason: 'revoked' });
    const again = s.devices.rotatePassword('gh-a-01')!;
    expect(again.device.revokedAt).toBeNull();
    expect(await s.devices.checkLogin('gh-a-01', again.password)).toEqual({ ok: true });
    expect(s.devices.rotatePassword('gh-zz-99')).toBeNull();
    expect(s.devices.revoke('gh-zz-99', at)).toBeNull();
  });
});

describe('data folder permissions', () => {
  it.runIf(storeBackend === 'sqlite')('creates the data folder 0700 and the database 0600, and tightens a database that was readable by others', () => {
    const parent = tempDir();
    const dir = join(parent, 'data');
    open(dir).close();
    expect(statSync(dir).mode & 0o777).toBe(0o700);
    expect(statSync(join(dir, 'ocellus.db')).mode & 0o777).toBe(0o600);
    const other = join(parent, 'older');
    mkdirSync(other);
    writeFileSync(join(other, 'ocellus.db'), '', { mode: 0o644 });
    const s = open(other);
    sqliteHandle(s).prepare('SELECT 1').get();
    expect(statSync(join(other, 'ocellus.db')).mode & 0o777).toBe(0o600);
    expect(statSync(join(other, 'ocellus.db-wal')).mode & 0o777).toBe(0o600);
  });

  it('sweeps upload remnants left in blobs/tmp by an earlier process when the blob store opens, once they are an hour old', () => {
    const dir = tempDir();
    createBlobStore(dir);
    const part = join(dir, 'blobs', 'tmp', '1700000000000-deadbeef.part');
    writeFileSync(part, 'half an upload');
    const writtenMs = statSync(part).mtimeMs;
    // Younger than the sweep age it may be another replica's upload in progress (tests/store/blob-tmp-sweep.test.ts).
    createBlobStore(dir, { nowMs: () => writtenMs + TMP_SWEEP_AGE_MS - 1 });
    expect(readdirSync(join(dir, 'blobs', 'tmp'))).toEqual(['1700000000000-deadbeef.part']);
    createBlobStore(dir, { nowMs: () => writtenMs + TMP_SWEEP_AGE_MS });
    expect(readdirSync(join(dir, 'blobs', 'tmp'))).toEqual([]);
  });
});

describe('failed-login limits', () => {
  it('refuses a source after its failures in a window, then a device id, and forgets both when the window ends', () => {
    let nowMs = 0;
    const guard = createLoginGuard({ maxFailuresPerSource: 3, maxFailuresPerId: 5, windowMs: 60_000, clock: { now: () => new Date(nowMs) } });
    for (let i = 0; i < 3; i++) {
      expect(guard.attempt('gh-a-01', '10.0.0.1')).toBeNull();
      guard.failed('gh-a-01', '10.0.0.1');
    }
    expect(guard.attempt('gh-a-02', '10.0.0.1')).toBe('source-limited');
    // Attempts for one id count while they are checked, so concurrent tries are limited too.
    expect(guard.attempt('gh-a-01', '10.0.0.2')).toBeNull();
    expect(guard.attempt('gh-a-01', '10.0.0.3')).toBeNull();
    expect(guard.attempt('gh-a-01', '10.0.0.4')).toBe('id-limited');
    expect(guard.attempt('gh-a-03', '10.0.0.4')).toBeNull();
    nowMs = 60_000;
    expect(guard.attempt('gh-a-01', '10.0.0.1')).toBeNull();
  });

  it('a fleet behind one address logging in at once is not refused; a correct login does not count', () => {
    const fleet = createLoginGuard({ maxFailuresPerSource: 20, maxFailuresPerId: 10 });
    const ids = Array.from({ length: 500 }, (_, i) => `gh-a-${String(i).padStart(3, '0')}`);
    expect(ids.map((id) => fleet.attempt(id, '192.0.2.7')).every((r) => r === null)).toBe(true);
    for (const id of ids) fleet.succeeded(id, '192.0.2.7');
    const guard = createLoginGuard({ maxFailuresPerSource: 2, maxFailuresPerId: 2 });
    for (let i = 0; i < 5; i++) {
      expect(guard.attempt('gh-a-01', '10.0.0.1')).toBeNull();
      guard.succeeded('gh-a-01', '10.0.0.1');
    }
  });

  it('keeps at most maxEntries sources, so made-up ids cannot grow memory without bound', () => {
    const guard = createLoginGuard({ maxFailuresPerSource: 1, maxFailuresPerId: 100, maxEntries: 2 });
    guard.failed('a', 's1');
    guard.failed('b', 's2');
    guard.failed('c', 's3');
    expect(guard.attempt('x', 's1')).toBeNull();
    expect(guard.attempt('x', 's3')).toBe('source-limited');
  });
});
