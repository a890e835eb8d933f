/**
 * Fault: the embedded broker goes away in the middle of a staged rollout (the server process that holds it
 * is stopped and started again on the same ports and data folder). Retained releases lived only in the old
 * broker's memory; the server republishes them, the rollout engine resumes from the database, and the fleet
 * must converge on the new release. (Demo data: greenhouse scout A robots.)
 */
import { afterAll, describe, expect, it } from 'vitest';
import { createRevisedRelease } from '../../src/demo/load-scenario.js';
import { waitFor } from '../support/agent-fixtures.js';
import { startFaultSite, type FaultSite } from '../support/fault-rig.js';

const ROBOTS = ['gh-brk-01', 'gh-brk-02', 'gh-brk-03'];
let site: FaultSite | null = null;

afterAll(async () => {
  await site?.close();
});

interface DeviceView {
  online: boolean | null;
  reportedState: { releaseId: string | null; activeTask: string | null; pending: unknown } | null;
}
interface RolloutView {
  status: string;
  currentWave: number;
  devices: Array<{ deviceId: string; status: string; reason: string | null }>;
}

async function reported(s: FaultSite, id: string): Promise<DeviceView> {
  return s.api.json<DeviceView>('GET', `/api/v1/devices/${id}`);
}

describe('broker restarted during a rollout', () => {
  it('the rollout resumes and every robot ends up running the new release', async () => {
    site = await startFaultSite('broker');
    const s = site;
    for (const id of ROBOTS) await s.startRobot(id, ['--telemetry-interval-s', '0.2']);
    for (const id of ROBOTS) await s.api.json('POST', `/api/v1/devices/${id}/assign`, { releaseId: s.releaseA });
    await waitFor(async () => {
      const views = await Promise.all(ROBOTS.map((id) => reported(s, id)));
      return views.every((v) => v.reportedState?.releaseId === s.releaseA);
    }, 'every robot to run the first release', 60_000, 200);

    const revised = (await createRevisedRelease(s.api)).release.release;
    const created = await s.api.json<{ id: string }>('POST', '/api/v1/rollouts', {
      releaseId: revised.id,
      target: { deviceIds: ROBOTS },
      waves: [1, 1],
      gate: { applyTimeoutS: 300, telemetryFrames: 5, telemetryTimeoutS: 300, latencyTolerance: 0.25 },
      offline: { waitS: 300, then: 'fail' },
      note: 'fault test (demo data)',
    });
    // Stop the broker once the canary has been sent the release, before the later waves.
    await waitFor(async () => {
      const r = await s.api.json<RolloutView>('GET', `/api/v1/rollouts/${created.id}`);
      return r.devices.some((d) => d.status !== 'waiting') && r.status === 'running';
    }, 'the canary to be assigned', 60_000, 100);
    expect(await s.server.stop()).toBe(0);
    await s.restartServer();

    const done = await waitFor(async () => {
      const r = await s.api.json<RolloutView>('GET', `/api/v1/rollouts/${created.id}`);
      if (r.status !== 'running') return r;
      return null;
    }, 'the rollout to finish', 120_000, 250);
    expect(done.status, JSON.stringify(done.devices)).toBe('completed');
    expect(done.devices.map((d) => d.status)).toEqual(['passed', 'passed', 'passed']);
    await waitFor(async () => {
      const views = await Promise.all(ROBOTS.map((id) => reported(s, id)));
      return views.every((v) => v.online === true && v.reportedState?.releaseId === revised.id && v.reportedState.pending === null);
    }, 'every robot to report the new release, nothing pending', 60_000, 200);
  });
});
