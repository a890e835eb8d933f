import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { createHarness, failingProfile, goodProfile, removeDir, seedCatalog, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
beforeEach(async () => {
  h = createHarness(tempDataDir());
  await seedCatalog(h, { profiles: [] });
});
afterEach(() => {
  h.closeStore();
  removeDir(h.dir);
});

type Revision = { profileId: string; revision: number; status: string; report: { status: string; checks: Array<{ code: string; status: string }> }; refs: unknown };

describe('profile revisions', () => {
  it('saves each change as a new immutable revision carrying its validation report', async () => {
    const first = await h.call('POST', '/api/v1/profiles', { body: goodProfile, token: h.tokens.engineer });
    expect(first.status).toBe(201);
    const r1 = (await first.json()) as Revision;
    expect(r1).toMatchObject({ profileId: goodProfile.id, revision: 1, status: 'pass' });
    expect(r1.report.checks.length).toBeGreaterThan(5);
    expect(r1.refs).toEqual({
      task: { id: goodProfile.taskId, version: 1 },
      deviceClass: { id: goodProfile.deviceClassId, version: 1 },
      model: { id: goodProfile.modelId, version: 1 },
      network: { id: 'gh-test-net', version: 1 },
    });
    const blurred = { ...goodProfile, camera: failingProfile.camera };
    const second = (await (await h.call('PUT', `/api/v1/profiles/${goodProfile.id}`, { body: blurred })).json()) as Revision;
    expect(second).toMatchObject({ revision: 2, status: 'fail' });
    const latest = (await (await h.call('GET', `/api/v1/profiles/${goodProfile.id}`)).json()) as Revision;
    expect(latest.revision).toBe(2);
    const one = (await (await h.call('GET', `/api/v1/profiles/${goodProfile.id}/revisions/1`)).json()) as Revision;
    expect(one.status).toBe('pass');
    const all = (await (await h.call('GET', `/api/v1/profiles/${goodProfile.id}/revisions`)).json()) as Revision[];
    expect(all.map((r) => [r.revision, r.status])).toEqual([
      [1, 'pass'],
      [2, 'fail'],
    ]);
    expect(h.store.audit.query({ target: `profile/${goodProfile.id}` }).map((a) => a.action)).toEqual(['profile.revise', 'profile.create']);
    const metrics = await (await h.call('GET', '/metrics')).text();
    expect(metrics).toMatch(/ocellus_validation_failures_total\{where="save"\} 1/);
  });

  it('diffs two revisions field by field', async () => {
    await h.call('POST', '/api/v1/profiles', { body: goodProfile });
    await h.call('PUT', `/api/v1/profiles/${goodProfile.id}`, { body: { ...goodProfile, camera: { ...goodProfile.camera, fNumber: 5.6 }, notes: 'stopped down (demo data)' } });
    const diff = (await (await h.call('GET', `/api/v1/profiles/${goodProfile.id}/diff?from=1&to=2`)).json()) as { changes: unknown[]; status: unknown };
    expect(diff.changes).toEqual([
      { path: 'camera.fNumber', change: 'changed', before: 4, after: 5.6 },
      { path: 'notes', change: 'added', after: 'stopped down (demo data)' },
    ]);
    expect((await h.call('GET', `/api/v1/profiles/${goodProfile.id}/diff?from=1&to=7`)).status).toBe(404);
    const bad = await h.call('GET', `/api/v1/profiles/${goodProfile.id}/diff?from=one&to=2`);
    expect(bad.status).toBe(400);
    expect(((await bad.json()) as { issues: Array<{ path: string }> }).issues[0]!.path).toBe('from');
  });

  it('names each missing reference with 400 and saves nothing', async () => {
    const res = await h.call('POST', '/api/v1/profiles', { body: { ...goodProfile, taskId: 'no-task', modelId: 'no-model' } });
    expect(res.status).toBe(400);
    const issues = ((await res.json()) as { issues: Array<{ path: string; message: string }> }).issues;
    expect(issues.map((i) => i.path)).toEqual(['taskId', 'modelId']);
    expect(issues[0]!.message).toContain("'no-task'");
    expect(h.store.profiles.list()).toEqual([]);
  });

  it('refuses settings the lens and sensor cannot physically take (400, physicalLimitIssues)', async () => {
    const res = await h.call('POST', '/api/v1/profiles', { body: { ...goodProfile, camera: { ...goodProfile.camera, fNumber: 1.4, analogGain: 64 } } });
    expect(res.status).toBe(400);
    const issues = ((await res.json()) as { issues: Array<{ path: string }> }).issues.map((i) => i.path);
    expect(issues).toEqual(['camera.fNumber', 'camera.analogGain']);
    expect(h.store.profiles.list()).toEqual([]);
  });

  it('validates without saving for the live check', async () => {
    const res = await h.call('POST', '/api/v1/validate', { body: failingProfile, token: h.tokens.viewer });
    expect(res.status).toBe(200);
    const body = (await res.json()) as { report: { status: string; checks: Array<{ code: string; status: string }> } };
    expect(body.report.status).toBe('fail');
    expect(body.report.checks.some((c) => c.code === 'blur-over-range' && c.status === 'fail')).toBe(true);
    expect(h.store.profiles.list()).toEqual([]);
  });
});
