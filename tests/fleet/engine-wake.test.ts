/**
 * The rollout engine woken by devices' reports (the bridge's onStored) rather than by its timer, and its timer
 * passes left with the clock's verdicts only. Real SQLite, the embedded broker, the bus bridge and real agents
 * (demo data: greenhouse row cameras).
 */
import mqtt from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createRolloutEngine } from '../../src/fleet/rollout/engine.js';
import { createRolloutService } from '../../src/fleet/rollout/service.js';
import { rolloutRequestSchema } from '../../src/fleet/rollout/spec.js';
import { PROTOCOL_VERSION, deviceTopic, type StateMessage } from '../../src/protocol/index.js';
import { waitFor } from '../support/agent-fixtures.js';
import { startFleetRig, type FleetRig } from '../support/fleet-rig.js';
import { createManualScheduler } from '../support/manual-scheduler.js';

const HOUR_MS = 3_600_000;
const ids = ['gh-wake-01', 'gh-wake-02', 'gh-wake-03'];
let rig: FleetRig;

const rolloutOf = async (id: string) => (await rig.call('GET', `/api/v1/rollouts/${id}`)).body;

beforeAll(async () => {
  // The rig's engine gets an hour-long tick on timers the test advances: it moves only when told to or woken.
  rig = await startFleetRig({ tickMs: HOUR_MS, calibrationEveryMs: HOUR_MS });
  rig.storeRelease('gh-wake-rel-1', 1);
  for (const id of ids) {
    rig.enrol(id, ['wake']);
    await rig.startAgent(id);
  }
  await waitFor(() => ids.every((id) => rig.bridge.deviceStates.get(id)?.online), 'every agent online in the store', 30_000);
}, 60_000);

afterAll(async () => {
  await rig?.close();
});

/**
 * A device that says it is online and then ignores every release (a bare MQTT client, no agent), in a rollout
 * run by a second engine whose clock and timers the test moves; the rig's engine stays idle (hour-long tick,
 * nothing moving). `calibration` is what that engine's latency gate asks (a gate with telemetry frames asks it).
 */
async function applyTimeoutOnTimerPass(mute: string, calibration: { latencyFactor(deviceClassId: string): number }, telemetryFrames: number) {
  let nowMs = Date.now();
  const clock = { now: () => new Date(nowMs) };
  const time = createManualScheduler();
  const engine = createRolloutEngine({ store: rig.store, publisher: rig.bridge, clock, onDevicesStored: (l) => rig.bridge.onStored(l), tickMs: 20, calibration, scheduler: time });
  const password = rig.enrol(mute, ['mute']);
  const client = await mqtt.connectAsync(rig.broker.url, { username: mute, password, clientId: mute, reconnectPeriod: 0 });
  const state: StateMessage = {
    v: PROTOCOL_VERSION, online: true, agentVersion: 'test-mute-0', ts: new Date().toISOString(), releaseId: null, releaseVersion: null,
    activeTask: null, profileId: null, profileRevision: null, moving: false, pending: null, refused: null, lastSeq: 0,
  };
  await client.publishAsync(deviceTopic(mute, 'state'), JSON.stringify(state), { qos: 1, retain: true });
  await waitFor(() => rig.bridge.deviceStates.get(mute)?.online, 'the mute device online in the store');
  try {
    const service = createRolloutService(rig.store);
    const request = rolloutRequestSchema.parse({ releaseId: 'gh-wake-rel-1', target: { deviceIds: [mute] }, waves: ['100%'], gate: { applyTimeoutS: 30, telemetryFrames } });
    const created = service.create(request, 'test operator', clock.now().toISOString());
    if (!created.ok) throw new Error(created.message);
    engine.start();
    // The first timer pass assigns the wave.
    await time.advance(0);
    await engine.tick();
    expect(service.view(created.value.id)!.devices[0]?.status).toBe('assigned');
    expect(service.view(created.value.id)!.status).toBe('running');
    // 29 s later by the engine's clock the next timer pass leaves it waiting; 31 s later one fails it (rule: fail
    // after applyTimeoutS; the gate's settings, common practice).
    nowMs += 29_000;
    await time.advance(20);
    await engine.tick();
    expect(service.view(created.value.id)!.status).toBe('running');
    nowMs += 2_000;
    await time.advance(20);
    // Only the timer pass that just ran (its store writes may still be finishing) can have paused it.
    const paused = await waitFor(() => {
      const v = service.view(created.value.id)!;
      return v.status === 'paused' ? v : null;
    }, 'rollout paused by the apply timeout', 10_000);
    expect(paused.devices[0]).toMatchObject({ deviceId: mute, status: 'failed', reason: 'not applied within 30 s' });
  } finally {
    await engine.stop();
    await client.endAsync(true);
  }
}

describe('rollout engine woken by device reports', () => {
  it('after one pass assigns the wave, the devices\' reports alone carry it through the gate to completion', async () => {
    const created = await rig.call('POST', '/api/v1/rollouts', {
      releaseId: 'gh-wake-rel-1',
      target: { deviceIds: ids },
      waves: ['100%'],
      gate: { telemetryFrames: 0 },
    });
    expect(created.status).toBe(201);
    await rig.engine.tick();
    const assigned = await rolloutOf(created.body.id);
    expect(assigned.devices.map((d: { status: string }) => d.status)).not.toContain('waiting');
    // The engine's time moves a second per look (the rests between short passes count in it) and never reaches
    // the hour: completion can only come from passes the reports woke.
    const begunMs = rig.engineTime.nowMs();
    const done = await waitFor(async () => {
      await rig.engineTime.advance(1_000);
      const r = await rolloutOf(created.body.id);
      return r.status === 'completed' ? r : null;
    }, 'rollout completed by reports', 30_000);
    expect(rig.engineTime.nowMs() - begunMs).toBeLessThan(HOUR_MS);
    expect(done.devices.every((d: { status: string; appliedAt: string | null }) => d.status === 'passed' && d.appliedAt !== null)).toBe(true);
  });

  it('a device that never applies fails its apply timeout on a timer pass, by the engine\'s clock', async () => {
    await applyTimeoutOnTimerPass('gh-wake-mute', rig.calibration, 0);
  });

  it('a pass slow by the process\'s clock (a loaded machine) does not move the timer passes off the engine\'s clock', async () => {
    // Every pass over this gate (it checks latency) works at least 30 ms of real time: the rests between timer
    // passes are counted on the engine's scheduler, where no time passes during a pass.
    const slow = {
      latencyFactor: (deviceClassId: string) => {
        const until = performance.now() + 30;
        while (performance.now() < until) { /* the work of a pass on a loaded machine */ }
        return rig.calibration.latencyFactor(deviceClassId);
      },
    };
    await applyTimeoutOnTimerPass('gh-wake-mute-slow', slow, 1);
  });
});
