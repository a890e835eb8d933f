import { readdirSync } from 'node:fs';
import { afterEach, describe, expect, it } from 'vitest';
import type { SignedRelease } from '../../src/protocol/release.js';
import { verifyRelease } from '../../src/protocol/verify-release.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';
import { deviceClass, goodProfile, model, network, removeDir, task, tempDataDir, weights } from '../support/api-fixtures.js';

const ADMIN = 'demo-data-admin-token-0123456789';
let dir: string;
let running: RunningServer | null = null;

afterEach(async () => {
  await running?.close();
  running = null;
  removeDir(dir);
});

async function call(server: RunningServer, method: string, path: string, body?: unknown, token = ADMIN) {
  const init: RequestInit = { method, headers: { authorization: `Bearer ${token}`, 'content-type': Buffer.isBuffer(body) ? 'application/octet-stream' : 'application/json' } };
  if (body !== undefined) init.body = Buffer.isBuffer(body) ? new Uint8Array(body) : JSON.stringify(body);
  return fetch(`${server.url}${path}`, init);
}

describe('restarting the server on the same data folder', () => {
  it('finds documents, revisions, releases, devices, weights, tokens, audit and the same signing key again', async () => {
    dir = tempDataDir();
    running = await startServer({ dataDir: dir, port: 0, adminToken: ADMIN });
    expect(running.adminSeed).toBe('stored');
    expect(running.url).toMatch(/^http:\/\/127\.0\.0\.1:\d+$/);
    for (const [path, body] of [
      ['/api/v1/device-classes', deviceClass],
      ['/api/v1/networks', network],
      ['/api/v1/models', model],
      ['/api/v1/tasks', task],
      ['/api/v1/profiles', goodProfile],
    ] as const) {
      expect((await call(running, 'POST', path, body)).status, path).toBe(201);
    }
    expect((await call(running, 'PUT', `/api/v1/models/${model.id}/weights`, weights)).status).toBe(201);
    const created = await call(running, 'POST', '/api/v1/releases', { deviceClassId: deviceClass.id, tasks: { count: { profileId: goodProfile.id, revision: 1 } }, defaultTask: 'count' });
    const signed = (await created.json()) as SignedRelease;
    const enrol = (await (await call(running, 'POST', '/api/v1/devices', { id: 'gh-01', deviceClassId: deviceClass.id, tags: ['row-1'] })).json()) as { mqtt: { password: string } };
    expect((await call(running, 'POST', '/api/v1/devices/gh-01/assign', { releaseId: signed.release.id })).status).toBe(200);
    const key1 = (await (await call(running, 'GET', '/api/v1/signing-key')).json()) as { publicKeyPem: string; keyId: string };
    const auditCount = ((await (await call(running, 'GET', '/api/v1/audit?limit=1000')).json()) as unknown[]).length;
    await running.close();
    running = null;

    running = await startServer({ dataDir: dir, port: 0, adminToken: ADMIN });
    expect(running.adminSeed).toBe('already-present');
    const key2 = (await (await call(running, 'GET', '/api/v1/signing-key')).json()) as { publicKeyPem: string; keyId: string };
    expect(key2).toEqual(key1);
    const release = (await (await call(running, 'GET', `/api/v1/releases/${signed.release.id}`)).json()) as SignedRelease;
    expect(release).toEqual(signed);
    expect(verifyRelease(release, key2.publicKeyPem, deviceClass.id).ok).toBe(true);
    const device = (await (await call(running, 'GET', '/api/v1/devices/gh-01')).json()) as { assignedReleaseId: string; tags: string[] };
    expect(device).toMatchObject({ assignedReleaseId: signed.release.id, tags: ['row-1'] });
    expect(running.store.verifyDeviceCredentials('gh-01', enrol.mqtt.password)).toBe(true);
    const profile = (await (await call(running, 'GET', `/api/v1/profiles/${goodProfile.id}`)).json()) as { revision: number; status: string };
    expect(profile).toMatchObject({ revision: 1, status: 'pass' });
    const download = await call(running, 'GET', `/api/v1/models/${model.id}/weights`);
    expect(Buffer.from(await download.arrayBuffer()).equals(weights)).toBe(true);
    expect(((await (await call(running, 'GET', '/api/v1/audit?limit=1000')).json()) as unknown[]).length).toBe(auditCount);
    // The next release continues the version sequence.
    const next = (await (await call(running, 'POST', '/api/v1/releases', { deviceClassId: deviceClass.id, tasks: { count: { profileId: goodProfile.id, revision: 1 } }, defaultTask: 'count' })).json()) as SignedRelease;
    expect(next.release.version).toBe(2);
  });

  it('ignores OCELLUS_ADMIN_TOKEN once tokens exist, and refuses a short one', async () => {
    dir = tempDataDir();
    running = await startServer({ dataDir: dir, port: 0, adminToken: ADMIN });
    await running.close();
    running = await startServer({ dataDir: dir, port: 0, adminToken: 'another-admin-token-of-demo-data' });
    expect(running.adminSeed).toBe('not-first-start');
    expect((await call(running, 'GET', '/api/v1/tokens', undefined, 'another-admin-token-of-demo-data')).status).toBe(401);
    await running.close();
    running = null;
    await expect(startServer({ dataDir: dir, port: 0, adminToken: 'short' })).rejects.toThrow(/at least 24 characters/);
  });

  it('closes the database and leaves no temporary upload files after close', async () => {
    dir = tempDataDir();
    running = await startServer({ dataDir: dir, port: 0, adminToken: ADMIN });
    const store = running.store;
    await running.close();
    running = null;
    expect(store.isOpen()).toBe(false);
    expect(readdirSync(`${dir}/blobs/tmp`)).toEqual([]);
  });
});
