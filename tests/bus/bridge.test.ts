import mqtt, { type MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBus, type Bus } from '../../src/bus/start-bus.js';
import { MAX_PAYLOAD_BYTES, PROTOCOL_VERSION, deviceTopic, type StateMessage } from '../../src/protocol/index.js';
import { openStore, type Store } from '../../src/store/index.js';
import { MOSQUITTO_SKIP_NOTE, MOSQUITTO_URL, mosquittoUp, tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

function state(online: boolean, releaseId: string | null): StateMessage {
  return {
    v: PROTOCOL_VERSION, online, agentVersion: 'test', ts: new Date().toISOString(), releaseId, releaseVersion: releaseId ? 3 : null,
    activeTask: releaseId ? 'rows' : null, profileId: null, profileRevision: null, moving: false, pending: null, refused: null, lastSeq: 0,
  };
}

function events(seqs: number[]) {
  return JSON.stringify({ v: PROTOCOL_VERSION, events: seqs.map((seq) => ({ seq, ts: new Date().toISOString(), type: 'motion', moving: seq % 2 === 0 })) });
}

interface Rig {
  bus: Bus; store: Store; deviceUrl: string;
  /** An account that may publish anywhere, to play a misbehaving sender. */
  server: { username: string; password: string };
  credentials(id: string): { username: string; password: string };
  close(): Promise<void>;
}

async function embeddedRig(): Promise<Rig> {
  const dir = tempDir('bridge');
  const store = openStore(dir.path);
  const server = { username: 'test-server', password: 'test-server-secret' };
  const bus = await startBus({ store, embedded: { port: 0, serverUser: server } });
  const passwords = new Map<string, string>();
  return {
    bus, store, deviceUrl: bus.brokerUrl, server,
    credentials(id) {
      if (!passwords.has(id)) passwords.set(id, store.devices.enrol({ id, deviceClassId: 'gh-rowcam-a', tags: [], actor: 'test', at: new Date().toISOString() })!.password);
      return { username: id, password: passwords.get(id)! };
    },
    async close() { await bus.close(); store.close(); dir.remove(); },
  };
}

async function mosquittoRig(): Promise<Rig> {
  const dir = tempDir('bridge-mq');
  const store = openStore(dir.path);
  // The system Mosquitto runs its default configuration: any user name is accepted.
  const bus = await startBus({ store, external: { url: MOSQUITTO_URL, username: 'ocellus-test-server', password: 'unused' } });
  return {
    bus, store, deviceUrl: MOSQUITTO_URL, server: { username: 'ocellus-test-sender', password: 'unused' },
    credentials(id) {
      if (!store.devices.get(id)) store.devices.enrol({ id, deviceClassId: 'gh-rowcam-a', tags: [], actor: 'test', at: new Date().toISOString() });
      return { username: id, password: 'unused' };
    },
    async close() { await bus.close(); store.close(); dir.remove(); },
  };
}

async function device(rig: Rig, id: string, will?: StateMessage): Promise<{ client: MqttClient; acks: number[] }> {
  const client = await mqtt.connectAsync(rig.deviceUrl, {
    ...rig.credentials(id), clientId: id, reconnectPeriod: 0,
    ...(will ? { will: { topic: deviceTopic(id, 'state'), payload: Buffer.from(JSON.stringify(will)), qos: 1 as const, retain: true } } : {}),
  });
  const acks: number[] = [];
  client.on('message', (_t, p) => acks.push((JSON.parse(p.toString()) as { upTo: number }).upTo));
  await client.subscribeAsync(deviceTopic(id, 'ack'), { qos: 1 });
  return { client, acks };
}

const brokers = [
  { name: 'embedded broker', up: true, make: embeddedRig },
  { name: 'Mosquitto on 127.0.0.1:1883', up: mosquittoUp, make: mosquittoRig },
];

for (const b of brokers) {
  describe.skipIf(!b.up)(`bridge over the ${b.name}`, () => {
    let rig: Rig;
    beforeAll(async () => { rig = await b.make(); });
    afterAll(async () => rig?.close());

    it('stores the latest state, and the last will marks the device offline while keeping what it runs', async () => {
      const id = uniqueDeviceId('state');
      const d = await device(rig, id, state(false, null));
      await d.client.publishAsync(deviceTopic(id, 'state'), JSON.stringify(state(true, 'rel-7')), { qos: 1, retain: true });
      await waitFor(() => rig.bus.bridge.deviceStates.get(id)?.online, 'state stored');
      expect(rig.bus.bridge.deviceStates.get(id)).toMatchObject({ online: true, releaseId: 'rel-7', activeTask: 'rows' });
      // An abrupt disconnect makes the broker publish the will.
      d.client.stream.destroy();
      await waitFor(() => rig.bus.bridge.deviceStates.get(id)?.online === false, 'will stored');
      expect(rig.bus.bridge.deviceStates.get(id)).toMatchObject({ online: false, releaseId: 'rel-7' });
      await rig.bus.bridge.clearRelease(id);
      const cleaner = await mqtt.connectAsync(rig.deviceUrl, { ...rig.credentials(id), reconnectPeriod: 0 });
      await cleaner.publishAsync(deviceTopic(id, 'state'), Buffer.alloc(0), { qos: 1, retain: true });
      await cleaner.endAsync();
    });

    it('stores each event once, acks the highest contiguous seq, and acks past a gap only once it fills', async () => {
      const id = uniqueDeviceId('events');
      const d = await device(rig, id);
      await d.client.publishAsync(deviceTopic(id, 'events'), events([1, 2, 4]), { qos: 1 });
      await waitFor(() => d.acks.length >= 1, 'first ack');
      expect(d.acks.at(-1)).toBe(2);
      await d.client.publishAsync(deviceTopic(id, 'events'), events([1, 2, 3]), { qos: 1 });
      await waitFor(() => d.acks.at(-1) === 4, 'ack after the gap filled');
      expect(sqliteHandle(rig.store).prepare('SELECT seq FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all(id)).toEqual([1, 2, 3, 4]);
      await d.client.endAsync();
    });

    it('rejects events of a device that is not enrolled and counts them', async () => {
      const ghost = uniqueDeviceId('ghost');
      const before = rig.bus.bridge.stats().rejected['unknown-device'];
      // On the embedded broker a device that is not enrolled cannot even log in; the server's account plays the sender.
      const client = await mqtt.connectAsync(rig.deviceUrl, { ...rig.server, reconnectPeriod: 0 });
      await client.publishAsync(deviceTopic(ghost, 'events'), events([1]), { qos: 1 });
      await waitFor(() => rig.bus.bridge.stats().rejected['unknown-device'] > before, 'unknown device counted');
      expect(sqliteHandle(rig.store).prepare('SELECT COUNT(*) FROM device_events WHERE device_id = ?').pluck().get(ghost)).toBe(0);
      await client.endAsync();
    });
  });
}

if (!mosquittoUp) describe('bridge over Mosquitto', () => it.skip(MOSQUITTO_SKIP_NOTE, () => {}));

describe('bridge under a flood of bad messages (embedded broker)', () => {
  it('survives 10,000 malformed messages, counts each by reason and still stores good ones', async () => {
    const rig = await embeddedRig();
    try {
      const id = uniqueDeviceId('flood');
      rig.credentials(id);
      const sender = await mqtt.connectAsync(rig.deviceUrl, { ...rig.server, reconnectPeriod: 0 });
      const topic = deviceTopic(id, 'events');
      const bad = {
        'malformed-json': '{"v":1,"events":[',
        'unknown-version': JSON.stringify({ v: 99, events: [] }),
        'wrong-schema': JSON.stringify({ v: PROTOCOL_VERSION, events: [{ seq: 1, ts: 'yesterday', type: 'motion', moving: true }] }),
        oversized: 'x'.repeat(MAX_PAYLOAD_BYTES.events + 1),
      } as const;
      const sends: Promise<unknown>[] = [];
      for (let i = 0; i < 10_000; i++) {
        const reason = (Object.keys(bad) as Array<keyof typeof bad>)[i % 4]!;
        sends.push(sender.publishAsync(topic, bad[reason], { qos: 1 }));
      }
      await Promise.all(sends);
      await sender.publishAsync(topic, events([1]), { qos: 1 });
      await waitFor(() => rig.bus.bridge.stats().eventsStored === 1, 'the good message after the flood', 60_000);
      expect(rig.bus.bridge.stats().rejected).toEqual({ 'malformed-json': 2500, 'unknown-version': 2500, 'wrong-schema': 2500, oversized: 2500, 'unknown-device': 0 });
      await sender.endAsync();
    } finally {
      await rig.close();
    }
  });
});
