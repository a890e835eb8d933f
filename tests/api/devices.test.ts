import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { ASSIGN_CAUTION } from '../../src/api/index.js';
import type { SignedRelease, SignedReleaseText } from '../../src/protocol/release.js';
import { verifyRelease } from '../../src/protocol/verify-release.js';
import { createHarness, deviceClass, goodProfile, removeDir, seedCatalog, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
const sent: Array<{ deviceId: string; raw: string }> = [];
let failSending = false;
/** Stands in for the bus: records what would be published (the bus tests cover the broker itself). */
const publisher = {
  async publishRelease(deviceId: string, release: SignedReleaseText) {
    if (failSending) throw new Error('broker unreachable');
    sent.push({ deviceId, raw: release.raw });
  },
};

beforeEach(async () => {
  sent.length = 0;
  failSending = false;
  h = createHarness(tempDataDir(), { publisher });
  await seedCatalog(h);
});
afterEach(() => {
  h.closeStore();
  removeDir(h.dir);
});

async function enrol(id: string, tags: string[] = []) {
  return h.call('POST', '/api/v1/devices', { body: { id, deviceClassId: deviceClass.id, tags }, token: h.tokens.operator });
}

describe('device enrolment', () => {
  it('returns the MQTT password once; the store keeps only a hash that verifies it', async () => {
    const res = await enrol('GH-Scout-01', ['row-3', 'north']);
    expect(res.status).toBe(201);
    const body = (await res.json()) as { device: { id: string; tags: string[] }; mqtt: { username: string; password: string } };
    expect(body.mqtt.username).toBe('GH-Scout-01');
    expect(body.mqtt.password.length).toBeGreaterThanOrEqual(24);
    expect(h.store.verifyDeviceCredentials('GH-Scout-01', body.mqtt.password)).toBe(true);
    const read = await (await h.call('GET', '/api/v1/devices/GH-Scout-01')).text();
    expect(read).not.toContain(body.mqtt.password);
    expect(JSON.stringify(h.store.audit.query())).not.toContain(body.mqtt.password);
    expect((await enrol('GH-Scout-01')).status).toBe(409);
  });

  it('refuses ids that are not valid topic levels and unknown device classes, naming the field', async () => {
    for (const id of ['gh/01', 'gh+01', '#', '', 'a'.repeat(65)]) {
      const res = await enrol(id);
      expect(res.status, id).toBe(400);
      expect(((await res.json()) as { issues: Array<{ path: string }> }).issues[0]!.path).toBe('id');
    }
    const res = await h.call('POST', '/api/v1/devices', { body: { id: 'gh-01', deviceClassId: 'no-class', tags: [] } });
    expect(res.status).toBe(400);
    expect(((await res.json()) as { issues: Array<{ path: string }> }).issues[0]!.path).toBe('deviceClassId');
    expect(h.store.devices.list()).toEqual([]);
  });

  it('lists devices by class and tag', async () => {
    await enrol('gh-01', ['row-1']);
    await enrol('gh-02', ['row-2']);
    const byTag = (await (await h.call('GET', '/api/v1/devices?tag=row-2')).json()) as Array<{ id: string }>;
    expect(byTag.map((d) => d.id)).toEqual(['gh-02']);
    const byClass = (await (await h.call('GET', `/api/v1/devices?class=${deviceClass.id}`)).json()) as Array<{ id: string }>;
    expect(byClass.map((d) => d.id)).toEqual(['gh-01', 'gh-02']);
    expect(((await (await h.call('GET', '/api/v1/devices?class=other')).json()) as unknown[]).length).toBe(0);
  });
});

describe('online state from the bus bridge', () => {
  it('filters devices by the online flag of their last state and counts them in /metrics', async () => {
    await enrol('gh-01');
    await enrol('gh-02');
    await enrol('gh-03');
    const states = h.store.deviceStates;
    const at = '2025-03-01T10:00:00.000Z';
    states.putState('gh-01', { online: true, releaseId: null, releaseVersion: null, activeTask: null }, at);
    states.putState('gh-02', { online: false, releaseId: null, releaseVersion: null, activeTask: null }, at);
    const online = (await (await h.call('GET', '/api/v1/devices?online=true')).json()) as Array<{ id: string; lastSeenAt: string }>;
    expect(online.map((d) => d.id)).toEqual(['gh-01']);
    expect(online[0]!.lastSeenAt).toBe(at);
    const offline = (await (await h.call('GET', '/api/v1/devices?online=false')).json()) as Array<{ id: string }>;
    expect(offline.map((d) => d.id)).toEqual(['gh-02', 'gh-03']);
    expect(await (await h.call('GET', '/metrics')).text()).toMatch(/^ocellus_devices_online 1$/m);
    expect((await h.call('GET', '/api/v1/devices?online=maybe')).status).toBe(400);
  });
});

describe('assigning a release to one device', () => {
  async function release(): Promise<SignedRelease> {
    const res = await h.call('POST', '/api/v1/releases', {
      body: { deviceClassId: deviceClass.id, tasks: { count: { profileId: goodProfile.id, revision: 1 } }, defaultTask: 'count' },
    });
    return (await res.json()) as SignedRelease;
  }

  it('records the assignment with its cause, sends the signed release, and keeps the safety caution in the answer', async () => {
    await enrol('gh-01');
    const signed = await release();
    const res = await h.call('POST', '/api/v1/devices/gh-01/assign', { body: { releaseId: signed.release.id }, token: h.tokens.operator });
    expect(res.status).toBe(200);
    const body = (await res.json()) as { assignment: { cause: string }; publish: { status: string }; caution: string };
    expect(body.assignment.cause).toBe('manual');
    expect(body.publish).toEqual({ status: 'sent' });
    expect(body.caution).toBe(ASSIGN_CAUTION);
    expect(sent).toHaveLength(1);
    expect(sent[0]!.deviceId).toBe('gh-01');
    expect(verifyRelease(JSON.parse(sent[0]!.raw), h.publicKeyPem, deviceClass.id).ok).toBe(true);
    // The bytes sent are the stored bytes the API serves, not a re-serialized copy.
    expect(sent[0]!.raw).toBe(await (await h.call('GET', `/api/v1/releases/${signed.release.id}`)).text());
    const device = (await (await h.call('GET', '/api/v1/devices/gh-01')).json()) as { assignedReleaseId: string; assignments: unknown[] };
    expect(device.assignedReleaseId).toBe(signed.release.id);
    expect(device.assignments).toHaveLength(1);
    expect(h.store.audit.query({ action: 'device.assign' })[0]!.detail).toMatchObject({ releaseId: signed.release.id, cause: 'manual' });
  });

  it('keeps the assignment and says the release was not sent when the bus fails', async () => {
    await enrol('gh-01');
    const signed = await release();
    failSending = true;
    const res = await h.call('POST', '/api/v1/devices/gh-01/assign', { body: { releaseId: signed.release.id } });
    expect(res.status).toBe(200);
    expect(((await res.json()) as { publish: unknown }).publish).toEqual({ status: 'not-sent', reason: 'broker unreachable' });
    expect(h.store.devices.get('gh-01')!.assignedReleaseId).toBe(signed.release.id);
  });

  it('refuses an unknown device (404), an unknown release (400) and a release of another class (409)', async () => {
    const signed = await release();
    expect((await h.call('POST', '/api/v1/devices/gh-99/assign', { body: { releaseId: signed.release.id } })).status).toBe(404);
    await enrol('gh-01');
    const unknown = await h.call('POST', '/api/v1/devices/gh-01/assign', { body: { releaseId: 'no-release' } });
    expect(unknown.status).toBe(400);
    expect(((await unknown.json()) as { issues: unknown[] }).issues).toEqual([{ path: 'releaseId', message: "no release 'no-release' is stored" }]);
    const other = { ...deviceClass, id: 'gh-other', name: 'Other scout (demo data)' };
    await h.call('POST', '/api/v1/device-classes', { body: other });
    await h.call('POST', '/api/v1/devices', { body: { id: 'gh-02', deviceClassId: other.id, tags: [] } });
    const mismatch = await h.call('POST', '/api/v1/devices/gh-02/assign', { body: { releaseId: signed.release.id } });
    expect(mismatch.status).toBe(409);
    expect(((await mismatch.json()) as { issues: Array<{ path: string }> }).issues.map((i) => i.path)).toEqual(['releaseId']);
    expect(sent).toEqual([]);
    expect(h.store.audit.query({ action: 'device.assign' })).toEqual([]);
  });
});

describe('tokens', () => {
  it('shows a new token once, lists without secrets, and stops accepting it once revoked', async () => {
    const res = await h.call('POST', '/api/v1/tokens', { body: { role: 'viewer', label: 'greenhouse wall screen' } });
    expect(res.status).toBe(201);
    const { token, secret } = (await res.json()) as { token: { id: number }; secret: string };
    expect((await h.call('GET', '/api/v1/models', { token: secret })).status).toBe(200);
    const list = await (await h.call('GET', '/api/v1/tokens')).text();
    expect(list).toContain('greenhouse wall screen');
    expect(list).not.toContain(secret);
    expect((await h.call('POST', `/api/v1/tokens/${token.id}/revoke`)).status).toBe(200);
    expect((await h.call('GET', '/api/v1/models', { token: secret })).status).toBe(401);
    expect(h.store.audit.query({ target: `token/${token.id}` }).map((a) => a.action)).toEqual(['token.revoke', 'token.create']);
    expect((await h.call('POST', '/api/v1/tokens/999/revoke')).status).toBe(404);
  });

  it('filters the audit log by actor and time', async () => {
    const all = (await (await h.call('GET', '/api/v1/audit?limit=1000')).json()) as Array<{ actor: string; at: string }>;
    expect(all.length).toBeGreaterThan(5);
    const mine = (await (await h.call('GET', `/api/v1/audit?actor=${encodeURIComponent(all[0]!.actor)}&limit=2`)).json()) as unknown[];
    expect(mine).toHaveLength(2);
    const none = (await (await h.call('GET', '/api/v1/audit?from=2999-01-01T00:00:00Z')).json()) as unknown[];
    expect(none).toEqual([]);
    expect((await h.call('GET', '/api/v1/audit?from=yesterday')).status).toBe(400);
  });
});
