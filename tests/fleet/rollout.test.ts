/**
 * Rollouts in waves to 50 simulated agents: the embedded broker, real agents, real SQLite (demo data). The agents
 * are the set-up every scenario shares; each `it` works its own devices and releases and leaves no rollout
 * moving, so any one of them runs alone. The engine moves only when a test runs its passes (rig.driveRollout).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assignRelease } from '../../src/fleet/rollout/assign.js';
import { planWaves } from '../../src/fleet/rollout/spec.js';
import { generateSigningKeyPair } from '../../src/protocol/signing.js';
import { waitFor } from '../support/agent-fixtures.js';
import { startFleetRig, type FleetAgent, type FleetRig } from '../support/fleet-rig.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

const DEVICES = 50;
const ids = Array.from({ length: DEVICES }, (_, i) => `gh-row-${String(i).padStart(2, '0')}`);
/** The staged scenario's devices; wave 2 of the default plan over them holds positions 2-4. */
const staged = ids.slice(0, 30);
const refuser = staged[3]!;
/** The rollback scenario's devices. */
const returning = ids.slice(30);
const stranger = generateSigningKeyPair();

let rig: FleetRig;
const agents = new Map<string, FleetAgent>();

const reportedRelease = (id: string) => rig.bridge.deviceStates.get(id)?.releaseId ?? null;
const assignmentsByCause = (cause: string) =>
  sqliteHandle(rig.store).prepare('SELECT device_id AS d, COUNT(*) AS n FROM assignments WHERE cause = ? GROUP BY device_id').all(cause) as Array<{ d: string; n: number }>;
const auditOf = (rolloutId: string) => rig.store.audit.query({ target: `rollout/${rolloutId}`, limit: 1000 }).map((e) => `${e.action} by ${e.actor}`);
const settledOrPaused = (r: { status: string }) => r.status !== 'running';

beforeAll(async () => {
  rig = await startFleetRig({ calibrationEveryMs: 3_600_000 });
  rig.storeRelease('gh-rel-1', 1);
  rig.storeRelease('gh-rel-2', 2);
  rig.storeRelease('gh-rel-3', 3);
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
    expect(planWaves(30, [1, '10%'])).toEqual([1, 3, 26]);
    expect(planWaves(3, [1, '10%'])).toEqual([1, 1, 1]);
    expect(planWaves(1, [1, '10%'])).toEqual([1]);
    expect(planWaves(10, [2, '50%', 100])).toEqual([2, 5, 3]);
  });

  it('pauses at the wave holding a device that refuses the signature, naming it; resumes once it is fixed and completes every wave', async () => {
    let rolloutId = '';
    try {
      await pauseFixResume((id) => (rolloutId = id));
    } finally {
      // Never left holding its devices, whatever failed.
      if (rolloutId) await rig.call('POST', `/api/v1/rollouts/${rolloutId}/abort`);
    }
  });

  async function pauseFixResume(onCreated: (id: string) => void) {
    const created = await rig.call('POST', '/api/v1/rollouts', {
      releaseId: 'gh-rel-2',
      target: { deviceIds: staged },
      gate: { applyTimeoutS: 60, telemetryFrames: 4, telemetryTimeoutS: 60, latencyTolerance: 0.25 },
      offline: { waitS: 60, then: 'fail' },
    });
    expect(created.status).toBe(201);
    expect(created.body.caution).toMatch(/one unit/);
    expect(created.body.waves.map((w: { devices: number }) => w.devices)).toEqual([1, 3, 26]);
    const rolloutId: string = created.body.id;
    onCreated(rolloutId);
    const paused = await rig.driveRollout(rolloutId, settledOrPaused, 'rollout paused', 60_000);
    expect(paused.status).toBe('paused');
    // Waves are numbered from 1 in the API: the canary is wave 1, the refuser's wave 2.
    expect(paused.currentWave).toBe(2);
    expect(paused.pauseReason).toMatchObject({ kind: 'gate', wave: 2 });
    expect(paused.pauseReason.failures).toEqual([{ deviceId: refuser, reason: expect.stringMatching(/^refused the release: unknown-key/) }]);
    // Wave 1 passed; wave 3 was never assigned.
    const byId = new Map<string, { status: string; wave: number }>(paused.devices.map((d: { deviceId: string }) => [d.deviceId, d]));
    expect(byId.get(staged[0]!)!.status).toBe('passed');
    const wave3 = paused.devices.filter((d: { wave: number }) => d.wave === 3);
    expect(wave3).toHaveLength(26);
    expect(wave3.every((d: { status: string; assignmentId: number | null }) => d.status === 'waiting' && d.assignmentId === null)).toBe(true);
    expect(assignmentsByCause(`rollout:${rolloutId}`).map((r) => r.d).sort()).toEqual(staged.slice(0, 4).sort());
    expect(reportedRelease(staged[10]!)).toBe('gh-rel-1');

    // The refusing agent restarted with the right key, and the rollout resumed by the operator.
    const old = agents.get(refuser)!;
    await old.agent.stop();
    agents.set(refuser, await rig.startAgent(refuser, { dataDir: old.config.dataDir }));
    // Its report of the release it was assigned, now applied, is stored before the resume: a pass that still saw
    // the old agent's refusal would fail it again.
    await waitFor(() => reportedRelease(refuser) === 'gh-rel-2', 'the fixed agent reports release 2', 30_000);
    const resumed = await rig.call('POST', `/api/v1/rollouts/${rolloutId}/resume`);
    expect(resumed.status).toBe(200);
    const done = await rig.driveRollout(rolloutId, settledOrPaused, 'rollout completed', 90_000);
    expect(done.pauseReason, JSON.stringify(done.pauseReason)).toBe(null);
    expect(done.status).toBe('completed');
    expect(done.devices.every((d: { status: string }) => d.status === 'passed')).toBe(true);
    await waitFor(() => staged.every((id) => reportedRelease(id) === 'gh-rel-2'), 'release 2 on every staged device', 30_000);
    // Idempotent: exactly one assignment per device by this rollout, the resumed one included.
    const counts = assignmentsByCause(`rollout:${rolloutId}`);
    expect(counts).toHaveLength(staged.length);
    expect(counts.every((r) => r.n === 1)).toBe(true);
    const actions = auditOf(rolloutId);
    expect(actions.some((a) => a.startsWith('rollout.pause by fleet engine'))).toBe(true);
    expect(actions.some((a) => a.startsWith('rollout.resume by fleet test operator'))).toBe(true);
  }

  it('refuses a second rollout over the same devices with 409 naming the devices and the rollout', async () => {
    // The engine makes no pass here: the first rollout holds its devices without moving them, and is aborted after.
    const first = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-3', target: { deviceIds: [ids[0], ids[40]] } });
    expect(first.status).toBe(201);
    const rolloutId: string = first.body.id;
    try {
      const again = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-3', target: { deviceIds: [ids[0], ids[40], ids[41]] } });
      expect(again.status).toBe(409);
      expect(again.body.error).toContain(rolloutId);
      expect(again.body.conflicts).toEqual([
        { deviceId: ids[0], rolloutId },
        { deviceId: ids[40], rolloutId },
      ]);
      expect(again.body.issues[0]).toEqual({ path: 'target', message: `device '${ids[0]}' is held by rollout '${rolloutId}'` });
    } finally {
      expect((await rig.call('POST', `/api/v1/rollouts/${rolloutId}/abort`)).status).toBe(200);
    }
    expect(assignmentsByCause(`rollout:${rolloutId}`)).toEqual([]);
  });

  it("rolls back: every moved device gets its previous release's content again, as a new release with a higher sequence, and the rollout tracks convergence", async () => {
    const created = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-3', target: { deviceIds: returning }, gate: { telemetryFrames: 0 } });
    expect(created.status).toBe(201);
    const rolloutId: string = created.body.id;
    const completed = await rig.driveRollout(rolloutId, settledOrPaused, 'rollout completed', 90_000);
    expect(completed.status).toBe('completed');
    await waitFor(() => returning.every((id) => reportedRelease(id) === 'gh-rel-3'), 'release 3 on every returning device', 30_000);

    const asked = await rig.call('POST', `/api/v1/rollouts/${rolloutId}/rollback`);
    expect(asked.status).toBe(200);
    const done = await rig.driveRollout(rolloutId, (r) => r.status === 'rolled-back', 'rolled back', 60_000);
    expect(done.rollback).toEqual({ restored: returning.length, pending: 0, nothingToRestore: 0 });
    // Devices refuse a lower sequence, so the rollback made ONE re-issue of gh-rel-1 above gh-rel-3 and assigned it.
    const restoreIds = new Set(done.devices.map((d: { restoreReleaseId: string | null }) => d.restoreReleaseId));
    expect(restoreIds.size).toBe(1);
    const restoreId = [...restoreIds][0] as string;
    const restore = (await rig.call('GET', `/api/v1/releases/${restoreId}`)).body;
    expect(restore.release).toMatchObject({ version: 4, reissueOf: { releaseId: 'gh-rel-1', version: 1 } });
    const original = (await rig.call('GET', '/api/v1/releases/gh-rel-1')).body;
    expect(restore.release.tasks).toEqual(original.release.tasks);
    expect(returning.every((id) => reportedRelease(id) === restoreId)).toBe(true);
    const counts = assignmentsByCause(`rollback:${rolloutId}`);
    expect(counts).toHaveLength(returning.length);
    expect(counts.every((r) => r.n === 1)).toBe(true);
    // Every step is in the audit log with who did it.
    const actions = auditOf(rolloutId);
    expect(actions).toContain('rollout.create by fleet test operator#' + rig.store.tokens.list().find((t) => t.role === 'operator')!.id);
    expect(actions.some((a) => a.startsWith('rollout.rollback by fleet test operator'))).toBe(true);
    expect(actions.some((a) => a.startsWith('rollout.rolled-back by fleet engine'))).toBe(true);
    // The devices are free again: a new rollout over them is accepted.
    const next = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-rel-3', target: { deviceIds: [returning[0]] }, gate: { telemetryFrames: 0 } });
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
