import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { canonicalJson } from '../../src/protocol/canonical-json.js';
import { keyIdOf, verifyCanonical } from '../../src/protocol/signing.js';
import { signedReleaseSchema, type SignedRelease } from '../../src/protocol/release.js';
import { verifyRelease } from '../../src/protocol/verify-release.js';
import { createHarness, deviceClass, failingProfile, goodProfile, model, removeDir, seedCatalog, task, tempDataDir, weightsSha256, type Harness } from '../support/api-fixtures.js';

let h: Harness;
beforeEach(async () => {
  h = createHarness(tempDataDir());
  await seedCatalog(h);
});
afterEach(() => {
  h.closeStore();
  removeDir(h.dir);
});

const request = (tasks: Record<string, { profileId: string; revision: number }>, extra: Record<string, unknown> = {}) => ({
  deviceClassId: deviceClass.id,
  tasks,
  defaultTask: Object.keys(tasks)[0],
  ...extra,
});

async function create(body: unknown, token = h.tokens.operator) {
  return h.call('POST', '/api/v1/releases', { body, token });
}

describe('release building and signing', () => {
  it('builds the protocol release from the revision, with the task rate and predicted figures of its report', async () => {
    const res = await create(request({ count: { profileId: goodProfile.id, revision: 1 } }));
    expect(res.status).toBe(201);
    const signed = signedReleaseSchema.parse(await res.json());
    const { release } = signed;
    expect(release).toMatchObject({
      format: 'ocellus.release/2', version: 1, deviceClassId: deviceClass.id, applyPolicy: 'when-idle', defaultTask: 'count',
      audience: { deviceClassId: deviceClass.id },
    });
    // Signed expiry: 90 days after it was made (the server's release validity).
    expect(Date.parse(release.expiresAt!) - Date.parse(release.createdAt)).toBe(90 * 86_400_000);
    expect(release.id).toBe(`${deviceClass.id}-v1`);
    expect(release.createdBy).toMatch(/^test operator#/);
    expect(release.deviceClass.lens.focalLengthMm).toBe(6);
    const t = release.tasks.count!;
    expect(t.camera).toEqual(goodProfile.camera);
    expect(t.memory).toEqual(goodProfile.memory);
    expect(t.model).toEqual({ id: model.id, version: model.version, sha256: weightsSha256, sizeBytes: model.sizeBytes, weightsPath: `/api/v1/models/${model.id}/weights?sha256=${weightsSha256}` });
    expect(t.frameRateHz).toBe(task.frameRateHz);
    const stored = (await (await h.call('GET', `/api/v1/profiles/${goodProfile.id}/revisions/1`)).json()) as {
      report: { figures: { latency: { inferenceMs: number; totalMs: number }; energy: { inferenceMj: number; totalMj: number } } };
    };
    const f = stored.report.figures;
    expect(t.predicted).toEqual({ inferenceMs: f.latency.inferenceMs, inferenceMj: f.energy.inferenceMj, frameLatencyMs: f.latency.totalMs, frameEnergyMj: f.energy.totalMj });
    expect(release.override).toBeUndefined();
  });

  it('signs with a key the API publishes; the signature fails after any byte of the release changes (Ed25519, RFC 8032)', async () => {
    const signed = (await (await create(request({ count: { profileId: goodProfile.id, revision: 1 } }))).json()) as SignedRelease;
    const key = (await (await h.call('GET', '/api/v1/signing-key', { token: null })).json()) as { publicKeyPem: string; keyId: string };
    expect(key.keyId).toBe(keyIdOf(key.publicKeyPem));
    expect(signed.keyId).toBe(key.keyId);
    expect(verifyCanonical(signed.release, signed.signature, key.publicKeyPem)).toBe(true);
    expect(verifyRelease(signed, key.publicKeyPem, deviceClass.id).ok).toBe(true);
    const pem = await h.call('GET', '/api/v1/signing-key?format=pem', { token: null });
    expect(pem.headers.get('content-type')).toBe('application/x-pem-file');
    expect(await pem.text()).toBe(key.publicKeyPem);

    // Flip each byte of the canonical text in turn (skipping changes that break the JSON): none verifies.
    const text = canonicalJson(signed.release);
    let tried = 0;
    for (let i = 0; i < text.length; i += 7) {
      const changed = text.slice(0, i) + String.fromCharCode(text.charCodeAt(i) ^ 1) + text.slice(i + 1);
      let parsed: unknown;
      try {
        parsed = JSON.parse(changed);
      } catch {
        continue;
      }
      if (canonicalJson(parsed) === text) continue;
      tried += 1;
      expect(verifyCanonical(parsed, signed.signature, key.publicKeyPem)).toBe(false);
    }
    expect(tried).toBeGreaterThan(50);
  });

  it('gives versions 1, 2, 3 per device class and stores each release as signed', async () => {
    const ids: string[] = [];
    for (let i = 0; i < 3; i++) {
      const res = await create(request({ count: { profileId: goodProfile.id, revision: 1 } }, { applyPolicy: 'immediate' }));
      ids.push(((await res.json()) as SignedRelease).release.id);
    }
    expect(ids).toEqual([1, 2, 3].map((v) => `${deviceClass.id}-v${v}`));
    const read = (await (await h.call('GET', `/api/v1/releases/${ids[1]}`, { token: h.tokens.viewer })).json()) as SignedRelease;
    expect(read.release.version).toBe(2);
    expect(read.release.applyPolicy).toBe('immediate');
    const list = (await (await h.call('GET', '/api/v1/releases')).json()) as Array<{ id: string }>;
    expect(list.map((r) => r.id)).toEqual(ids);
    expect(h.store.audit.query({ action: 'release.create' })).toHaveLength(3);
  });
});

describe('refusals', () => {
  it('refuses a failing revision with 422 and its failing checks, and stores nothing', async () => {
    const res = await create(request({ count: { profileId: failingProfile.id, revision: 1 } }));
    expect(res.status).toBe(422);
    const body = (await res.json()) as { issues: Array<{ path: string; message: string }>; failingChecks: Record<string, Array<{ code: string; status: string }>> };
    expect(body.failingChecks.count!.length).toBeGreaterThan(0);
    expect(body.failingChecks.count!.every((c) => c.status === 'fail')).toBe(true);
    expect(body.issues.every((i) => i.path === 'tasks.count')).toBe(true);
    expect(h.store.releases.list()).toEqual([]);
    expect(h.store.audit.query({ action: 'release.create' })).toEqual([]);
  });

  it('releases a failing revision when an override reason is given, and signs the reason and who gave it', async () => {
    const res = await create(request({ count: { profileId: failingProfile.id, revision: 1 } }, { override: { reason: 'bench trial on one unit, robot parked (demo data)' } }));
    expect(res.status).toBe(201);
    const signed = (await res.json()) as SignedRelease;
    expect(signed.release.override).toEqual({ reason: 'bench trial on one unit, robot parked (demo data)', by: expect.stringMatching(/^test operator#/) });
    expect(verifyCanonical(signed.release, signed.signature, h.publicKeyPem)).toBe(true);
    const audit = h.store.audit.query({ action: 'release.create' })[0]!;
    expect((audit.detail as { override: unknown }).override).toEqual(signed.release.override);
  });

  it('names a missing profile or revision (400) and refuses a profile of another device class (409)', async () => {
    const missing = await create(request({ count: { profileId: 'no-such-profile', revision: 1 }, night: { profileId: goodProfile.id, revision: 9 } }));
    expect(missing.status).toBe(400);
    const issues = ((await missing.json()) as { issues: Array<{ path: string }> }).issues.map((i) => i.path).sort();
    expect(issues).toEqual(['tasks.count.profileId', 'tasks.night.revision']);

    const other = { ...deviceClass, id: 'gh-test-scout-b', name: 'Second test scout (demo data)' };
    expect((await h.call('POST', '/api/v1/device-classes', { body: other })).status).toBe(201);
    const wrongClass = await create({ ...request({ count: { profileId: goodProfile.id, revision: 1 } }), deviceClassId: other.id });
    expect(wrongClass.status).toBe(409);
    expect(((await wrongClass.json()) as { issues: Array<{ message: string }> }).issues[0]!.message).toContain(`for device class '${deviceClass.id}'`);
  });

  it('refuses a revision validated against an older version of the device class', async () => {
    await h.call('PUT', `/api/v1/device-classes/${deviceClass.id}`, { body: { ...deviceClass, notes: 'recalibrated (demo data)' } });
    const res = await create(request({ count: { profileId: goodProfile.id, revision: 1 } }));
    expect(res.status).toBe(409);
    expect(((await res.json()) as { issues: Array<{ message: string }> }).issues[0]!.message).toMatch(/save a new revision/);
  });

  it('needs the default task among the tasks', async () => {
    const res = await create({ ...request({ count: { profileId: goodProfile.id, revision: 1 } }), defaultTask: 'patrol' });
    expect(res.status).toBe(400);
    expect(((await res.json()) as { issues: Array<{ path: string }> }).issues[0]!.path).toBe('defaultTask');
  });

  it('answers PUT, PATCH and DELETE of a release with 409 and leaves it as signed', async () => {
    const signed = (await (await create(request({ count: { profileId: goodProfile.id, revision: 1 } }))).json()) as SignedRelease;
    for (const method of ['PUT', 'PATCH', 'DELETE']) {
      const res = await h.call(method, `/api/v1/releases/${signed.release.id}`, { body: { ...signed, signature: 'x' } });
      expect(res.status, method).toBe(409);
    }
    const again = (await (await h.call('GET', `/api/v1/releases/${signed.release.id}`)).json()) as SignedRelease;
    expect(again).toEqual(signed);
  });
});
