import { signedReleaseText } from '../../src/protocol/release.js';
import { join } from 'node:path';
import mqtt from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { callControl } from '../../device-agent/control-client.js';
import { deviceTopic } from '../../src/protocol/index.js';
import { MOSQUITTO_SKIP_NOTE, MOSQUITTO_URL, demoRelease, demoTask, demoWeights, mosquittoUp, sign, tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { spawnAgent, type AgentProcess } from '../support/agent-process-rig.js';
import { agentConfig, startBusRig, startWeightsServer, writeProcessConfig, type BusRig, type WeightsServer } from '../support/agent-rig.js';
import { MOSQUITTO_BINARY_SKIP_NOTE, mosquittoBinary, startPrivateMosquitto, type PrivateMosquitto } from '../support/bus-mosquitto-rig.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

const rows = demoWeights('rows-net m');
const leaves = demoWeights('leaf-net m');
const tasks = { rows: demoTask('rows-net', rows, 0.5, 4), leaves: demoTask('leaf-net', leaves, 0.25, 2.8) };

let web: WeightsServer;
beforeAll(async () => {
  web = await startWeightsServer();
  web.files.set('/api/v1/models/rows-net/weights', rows.bytes);
  web.files.set('/api/v1/models/leaf-net/weights', leaves.bytes);
});
afterAll(async () => web.close());

function storedSeqs(bus: BusRig, id: string): number[] {
  return sqliteHandle(bus.store).prepare('SELECT seq FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all(id) as number[];
}

/** Removes the retained messages a test left on a shared broker. */
async function clearRetained(url: string, id: string) {
  const c = await mqtt.connectAsync(url, { username: 'ocellus-test-cleaner', password: 'unused', reconnectPeriod: 0 });
  for (const ch of ['release', 'state'] as const) await c.publishAsync(deviceTopic(id, ch), Buffer.alloc(0), { qos: 1, retain: true });
  await c.endAsync();
}

describe.skipIf(!mosquittoUp)('agent process over the system Mosquitto (127.0.0.1:1883)', () => {
  let bus: BusRig;
  const procs: AgentProcess[] = [];
  const dir = tempDir('agent-mq');
  const id = uniqueDeviceId('mq');
  beforeAll(async () => {
    bus = await startBusRig(MOSQUITTO_URL);
  });
  afterAll(async () => {
    for (const p of procs) await p.kill();
    await clearRetained(MOSQUITTO_URL, id);
    await bus?.close();
    dir.remove();
  });

  it('applies an assigned release, and converges on one assigned while the agent was off (retained release)', async () => {
    const config = agentConfig(id, bus.enrol(id), MOSQUITTO_URL, web.url, join(dir.path, 'data'));
    const configPath = writeProcessConfig(dir.path, config);
    const first = spawnAgent(['--config', configPath]);
    procs.push(first);
    await first.waitForOutput(/agent: connected to/, 'agent connected');
    await bus.bridge.publishRelease(id, signedReleaseText(sign(demoRelease('rel-m1', 1, tasks))));
    await waitFor(() => bus.bridge.deviceStates.get(id)?.releaseId === 'rel-m1', 'rel-m1 applied');
    await first.kill();
    await waitFor(() => bus.bridge.deviceStates.get(id)?.online === false, 'last will marks it offline');
    await bus.bridge.publishRelease(id, signedReleaseText(sign(demoRelease('rel-m2', 2, tasks))));
    const second = spawnAgent(['--config', configPath]);
    procs.push(second);
    await waitFor(() => bus.bridge.deviceStates.get(id)?.releaseId === 'rel-m2', 'rel-m2 applied after the restart');
    expect(bus.bridge.deviceStates.get(id)).toMatchObject({ online: true, activeTask: 'rows', releaseVersion: 2 });
    await second.stop();
  });
});
if (!mosquittoUp) describe('agent over the system Mosquitto', () => it.skip(MOSQUITTO_SKIP_NOTE, () => {}));

describe.skipIf(!mosquittoBinary)('agent process over a private Mosquitto that restarts mid-stream', () => {
  it('loses no event and stores none twice', async () => {
    const dir = tempDir('agent-mq-restart');
    const broker: PrivateMosquitto = await startPrivateMosquitto(dir.path);
    const bus = await startBusRig(broker.url);
    const id = uniqueDeviceId('mqstream');
    const config = agentConfig(id, bus.enrol(id), broker.url, web.url, join(dir.path, 'data'));
    const agent = spawnAgent(['--config', writeProcessConfig(dir.path, config)]);
    try {
      await agent.waitForOutput(/agent: connected to/, 'agent connected');
      const endpoint = { kind: 'tcp' as const, host: '127.0.0.1', port: 0 };
      await waitFor(() => agent.output.some((l) => /control endpoint http:\/\/127\.0\.0\.1:(\d+)/.test(l)), 'control endpoint');
      endpoint.port = Number(/control endpoint http:\/\/127\.0\.0\.1:(\d+)/.exec(agent.output.find((l) => /control endpoint http/.test(l))!)![1]);
      let moving = false;
      for (let round = 0; round < 3; round++) {
        for (let i = 0; i < 100; i++) await callControl(endpoint, 'POST', '/motion', { moving: (moving = !moving) });
        await broker.stop();
        for (let i = 0; i < 20; i++) await callControl(endpoint, 'POST', '/motion', { moving: (moving = !moving) });
        await broker.start();
      }
      const { lastSeq } = (await callControl(endpoint, 'GET', '/state')).body as { lastSeq: number };
      expect(lastSeq).toBe(1 + 360);
      await waitFor(() => storedSeqs(bus, id).length === lastSeq, 'every event stored', 30_000);
      expect(storedSeqs(bus, id)).toEqual(Array.from({ length: lastSeq }, (_v, i) => i + 1));
    } finally {
      await agent.kill();
      await bus.close();
      await broker.stop();
      dir.remove();
    }
  });
});
if (!mosquittoBinary) describe('agent over a private Mosquitto', () => it.skip(MOSQUITTO_BINARY_SKIP_NOTE, () => {}));
