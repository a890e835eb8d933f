import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assignRelease } from '../../src/fleet/rollout/assign.js';
import { planWaves } from '../../src/fleet/rollout/spec.js';
import { generateSigningKeyPair } from '../../src/protocol/signing.js';
import { waitFor } from '../support/agent-fixtures.js';
import { startFleetRig, type FleetAgent, type FleetRig } from '../support/fleet-rig.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

const DEVICES = 50;
const ids = Array.from({ length: DEVICES }, (_, i) => `gh-row-${String(i).padStart(2, '0')}`);
/** Wave 1 of the default plan holds positions 1-5: this one sits in it. */
const refuser = ids[3]!;
const stranger = generateSigningKeyPair();

let rig: FleetRig;
const agents = new Map<string, FleetAgent>();

const reportedRelease = (id: string) => rig.bridge.deviceStates.get(id)?.releaseId ?? null;
const rolloutOf = async (id: string) => (await rig.call('GET', `/api/v1/rollouts/${id}`)).body;
const assignmentsByCause = (cause: string) => sqliteHandle(rig.store).prepare('SELECT device_id AS d, COUNT(*) AS n FROM assignments WHERE cause = ? GROUP BY device_id').all(cause) as Array<{ d: string; n: number }>;

beforeAll(async () => {
  rig = await startFleetRig({ tickMs: 50, calibrationEveryMs: 500 });
  rig.storeRelease('gh-rel-1', 1);
  rig.storeRelease('gh-rel-2', 2);
  for (const id of ids) rig.enrol(id, ['greenhouse-a']);
  for (const id of ids) {
    const extra = id === refuser ? { publicKeyPem: stranger.publicKeyPem } : {};
    agents.set(id, await rig.startAgent(id, extra));
  }
  await waitFor(() => ids.every((id) => agents.get(id)!.agent.connected()), 'every agent connected', 30_000);
  // Everyone is assigned release 1 by hand; the refuser trusts a stranger key, so it refuses that one too and runs none.
  for (const id of ids) {
    const r = await assignRelease(rig.store, rig.bridge, { deviceId: id, releaseId: 'gh-rel-1', actor: 'test set-up', cause: 'manual' });
    expect(r.ok).toBe(true);
  }
  await waitFor(() => ids.filter((id) => id !== refuser).every((id) => reportedRelease(id) === 'gh-rel-1'), 'release 1 on every agent', 30_000);
}, 120_000);

afterAll(async () => {
  await rig?.close();
});

describe('rollout in waves to 50 simulated agents (embedded broker, real agents, real SQLite)', () => {
  it('default plan: one canary, then 10 %, then the rest (common practice for staged rollouts)', () => {
    expect(planWaves(50, [1, '10%'])).toEqual([1, 5, 44]);
    expect(planWaves(3, [1, '10%'])).toEqual([1, 1, 1]);
    expect(planWaves(1, [1, '10%'])).toEqual([1]);
    expect(planWaves(10, [2, '50%', 100])).toEqual([2, 5, 3]);
  });

  let rolloutId = '';

  it('pauses at the wave holding a device that refuses the signature, naming it and the reason', async () => {
    const created = await rig.call('POST', '/api/v1/rollouts', {
      releaseId: 'gh-rel-2',
      target: { deviceIds: ids },
      gate: { applyTimeoutS: 60, telemetryFrames: 4, telemetryTimeoutS: 60, latencyTolerance: 0.25 },
      offline: { waitS: 60, then: 'fail' },
    });
    expect(created.status).toBe(201);
    expect(created.body.caution).toMatch(/one unit/);
    expect(created.body.waves.map((w: { devices: number }) => w.devices)).toEqual([1, 5, 44]);
    rolloutId = created.body.id;
    const paused = await waitFor(async () => {
      const r = await rolloutOf(rolloutId);
      return r.status === 'paused' ? r : null;
    }, 'rollout paused', 60_000);
    // Waves are numbered from 1 in the API: the canary is wave 1, the refuser's wave 2.
    expect(paused.currentWave).toBe(2);
    expect(paused.pauseReason.wave).toBe(2);
    expect(paused.pauseReason.kind).toBe('gate');
    expect(paused.pauseReason.failures).toEqual([{ deviceId: refuser, reason: expect.stringMatching(/^refused the release: unknown-key/) }]);
    // Wave 1 passed; wave 3 was never assigned.
    const byId = new Map<string, { status: string; wave: number }>(paused.devices.map((d: { deviceId: string }) => [d.deviceId, d]));
    expect(byId.get(ids[0]!)!.status).toBe('passed');
    const wave2 = paused.devices.filter((d: { wave: number }) => d.wave === 3);
    expect(wave2).toHaveLength(44);
    expect(wave2.every((d: { status: string; assignmentId: number | null }) => d.status === 'waiting' && d.assignmentId === null)).toBe(true);
    expect(assignmentsByCause(`rollout:${rolloutId}`).map((r) => r.d).sort()).toEqual(ids.slice(0, 6).sort());
    expect(reportedRelease(ids[10]!)).toBe('gh-rel-1');
  });

  it('refuses a second rollout over the same devices with 409 naming the devices and the rollout', async () => {
    const again = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-2', target: { deviceIds: [ids[0], ids[40]] } });
    expect(again.status).toBe(409);
    expect(again.body.error).toContain(rolloutId);
    expect(again.body.conflicts).toEqual([
      { deviceId: ids[0], rolloutId },
      { deviceId: ids[40], rolloutId },
    ]);
    expect(again.body.issues[0]).toEqual({ path: 'target', message: `device '${ids[0]}' is held by rollout '${rolloutId}'` });
  });

  it('resumes after the refusing agent is restarted with the right key, and completes every wave', async () => {
    const old = agents.get(refuser)!;
    await old.agent.stop();
    const fixed = await rig.startAgent(refuser, { dataDir: old.config.dataDir });
    agents.set(refuser, fixed);
    const resumed = await rig.call('POST', `/api/v1/rollouts/${rolloutId}/resume`);
    expect(resumed.status).toBe(200);
    const done = await waitFor(async () => {
      const r = await rolloutOf(rolloutId);
      return r.status === 'completed' || r.status === 'paused' ? r : null;
    }, 'rollout completed', 90_000);
    expect(done.pauseReason).toBe(null);
    expect(done.status).toBe('completed');
    expect(done.devices.every((d: { status: string }) => d.status === 'passed')).toBe(true);
    await waitFor(() => ids.every((id) => reportedRelease(id) === 'gh-rel-2'), 'release 2 everywhere', 30_000);
    // Idempotent: exactly one assignment per device by this rollout, the resumed one included.
    const counts = assignmentsByCause(`rollout:${rolloutId}`);
    expect(counts).toHaveLength(DEVICES);
    expect(counts.every((r) => r.n === 1)).toBe(true);
  });

  it('rolls back: every moved device gets its previous release\'s content again, as a new release with a higher sequence, and the rollout tracks convergence', async () => {
    const asked = await rig.call('POST', `/api/v1/rollouts/${rolloutId}/rollback`);
    expect(asked.status).toBe(200);
    const done = await waitFor(async () => {
      const r = await rolloutOf(rolloutId);
      return r.status === 'rolled-back' ? r : null;
    }, 'rolled back', 60_000);
    expect(done.rollback).toEqual({ restored: DEVICES, pending: 0, nothingToRestore: 0 });
    // Devices refuse a lower sequence, so the rollback made ONE re-issue of gh-rel-1 above gh-rel-2 and assigned it.
    const restoreIds = new Set(done.devices.map((d: { restoreReleaseId: string | null }) => d.restoreReleaseId));
    expect(restoreIds.size).toBe(1);
    const restoreId = [...restoreIds][0] as string;
    const restore = (await rig.call('GET', `/api/v1/releases/${restoreId}`)).body;
    expect(restore.release).toMatchObject({ version: 3, reissueOf: { releaseId: 'gh-rel-1', version: 1 } });
    const original = (await rig.call('GET', '/api/v1/releases/gh-rel-1')).body;
    expect(restore.release.tasks).toEqual(original.release.tasks);
    expect(ids.every((id) => reportedRelease(id) === restoreId)).toBe(true);
    const counts = assignmentsByCause(`rollback:${rolloutId}`);
    expect(counts).toHaveLength(DEVICES);
    expect(counts.every((r) => r.n === 1)).toBe(true);
    // Every step is in the audit log with who did it.
    const actions = rig.store.audit.query({ target: `rollout/${rolloutId}`, limit: 1000 }).map((e) => `${e.action} by ${e.actor}`);
    expect(actions).toContain('rollout.create by fleet test operator#' + rig.store.tokens.list().find((t) => t.role === 'operator')!.id);
    expect(actions.some((a) => a.startsWith('rollout.pause by fleet engine'))).toBe(true);
    expect(actions.some((a) => a.startsWith('rollout.resume by fleet test operator'))).toBe(true);
    expect(actions.some((a) => a.startsWith('rollout.rollback by fleet test operator'))).toBe(true);
    expect(actions.some((a) => a.startsWith('rollout.rolled-back by fleet engine'))).toBe(true);
    // The devices are free again: a new rollout over them is accepted.
    const next = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-2', target: { deviceIds: [ids[0]] }, gate: { telemetryFrames: 0 } });
    expect(next.status).toBe(201);
    expect((await rig.call('POST', `/api/v1/rollouts/${next.body.id}/abort`)).status).toBe(200);
  });

  it('rejects bad rollout input with the field path and the reason', async () => {
    const bad = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-2', target: { deviceIds: ['nope-1'] }, waves: ['120%'] });
    expect(bad.status).toBe(400);
    expect(bad.body.issues.map((i: { path: string }) => i.path)).toContain('waves[0]');
    const unknown = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-2', target: { deviceIds: ['nope-1'] } });
    expect(unknown.status).toBe(400);
    expect(unknown.body.issues).toEqual([{ path: 'target.deviceIds[0]', message: "no device 'nope-1' is enrolled" }]);
    const noRelease = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'no-such', target: { tags: [] } });
    expect(noRelease.status).toBe(400);
    expect(noRelease.body.issues[0].path).toBe('releaseId');
    const resumeRunning = await rig.call('POST', '/api/v1/rollouts/nope/resume');
    expect(resumeRunning.status).toBe(404);
  });
});
