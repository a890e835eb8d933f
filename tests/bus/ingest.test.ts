import mqtt from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createBridge } from '../../src/bus/bridge.js';
import { startEmbeddedBroker } from '../../src/bus/broker.js';
import { startBus, type Bus } from '../../src/bus/start-bus.js';
import { PROTOCOL_VERSION, deviceTopic } from '../../src/protocol/index.js';
import { openStore, type Store } from '../../src/store/index.js';
import { tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

/** Demo data: a telemetry reading of a greenhouse scout, as an agent writes it (JSON.stringify of the logged event). */
const telemetryText = (seq: number, frames = 10) =>
  `{"seq":${seq},"ts":"2025-03-01T08:00:0${seq % 10}.000Z","type":"telemetry","task":"fruit-counting","profileId":"fruit-counting-a","profileRevision":1,"releaseId":"gh-scout-a-v1","frames":${frames},"windowS":1,"inferenceMsMean":0.141,"inferenceMjMean":0.0345,"frameEnergyMjMean":0.096}`;

describe('bridge ingest of telemetry batches (embedded broker)', () => {
  let dir: ReturnType<typeof tempDir>;
  let store: Store;
  let bus: Bus;
  beforeAll(async () => {
    dir = tempDir('bus-ingest');
    store = openStore(dir.path);
    bus = await startBus({ store, embedded: { port: 0 } });
  });
  afterAll(async () => {
    await bus.close();
    store.close();
    dir.remove();
  });

  async function device(id: string) {
    const { password } = store.devices.enrol({ id, deviceClassId: 'gh-scout-a', tags: [], actor: 'test', at: new Date().toISOString() })!;
    const client = await mqtt.connectAsync(bus.brokerUrl, { username: id, password, clientId: id, reconnectPeriod: 0 });
    const acks: number[] = [];
    client.on('message', (_t, p) => acks.push((JSON.parse(p.toString()) as { upTo: number }).upTo));
    await client.subscribeAsync(deviceTopic(id, 'ack'), { qos: 1 });
    return { client, acks };
  }

  it('stores each event\'s JSON exactly as the device sent it, and acks the batch', async () => {
    const id = uniqueDeviceId('ingest-text');
    const d = await device(id);
    const texts = [1, 2, 3].map((seq) => telemetryText(seq));
    // Spacing and key order are the device's own; the stored text keeps them.
    const sent = [texts[0], ` ${texts[1]}`, `\n${texts[2]}`];
    await d.client.publishAsync(deviceTopic(id, 'events'), `{"v":${PROTOCOL_VERSION},"events":[${sent.join(',')}]}`, { qos: 1 });
    await waitFor(() => d.acks.at(-1) === 3, 'ack of the batch');
    const stored = sqliteHandle(store).prepare('SELECT event FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all(id);
    expect(stored).toEqual(texts);
    await d.client.endAsync();
  });

  it('rejects a whole batch with one wrong telemetry event, counts it, and stores none of it', async () => {
    const id = uniqueDeviceId('ingest-bad');
    const d = await device(id);
    const before = bus.bridge.stats().rejected['wrong-schema'];
    const batch = [1, 2, 3, 4].map((seq) => telemetryText(seq, seq === 3 ? -1 : 10));
    await d.client.publishAsync(deviceTopic(id, 'events'), `{"v":${PROTOCOL_VERSION},"events":[${batch.join(',')}]}`, { qos: 1 });
    await waitFor(() => bus.bridge.stats().rejected['wrong-schema'] === before + 1, 'the batch counted as wrong-schema');
    expect(sqliteHandle(store).prepare('SELECT COUNT(*) FROM device_events WHERE device_id = ?').pluck().get(id)).toBe(0);
    expect(d.acks).toEqual([]);
    await d.client.endAsync();
  });
});

describe('device admission to the embedded broker', () => {
  it('holds a device\'s connection until the bridge has subscribed, so its first batch is stored, not dropped', async () => {
    const dir = tempDir('bus-admission');
    const store = openStore(dir.path);
    const serverUser = { username: 'test-server', password: 'test-server-secret' };
    let admit = () => {};
    const devicesAdmitted = new Promise<void>((resolve) => (admit = resolve));
    const broker = await startEmbeddedBroker({
      port: 0, serverUser, devicesAdmitted,
      authenticate: (id, password) => store.devices.verifyCredentialsAsync(id, password),
    });
    const id = uniqueDeviceId('admit');
    const { password } = store.devices.enrol({ id, deviceClassId: 'gh-scout-a', tags: [], actor: 'test', at: new Date().toISOString() })!;
    try {
      let connected = false;
      const deviceClient = mqtt.connectAsync(broker.url, { username: id, password, clientId: id, reconnectPeriod: 0 }).then((c) => ((connected = true), c));
      const server = await mqtt.connectAsync(broker.url, { ...serverUser, reconnectPeriod: 0 });
      const bridge = createBridge({ mqttClient: server, store, clock: { now: () => new Date() } });
      await bridge.subscribed();
      // The server's client got in and subscribed; the device is still at the door.
      expect(connected).toBe(false);
      admit();
      const device = await deviceClient;
      await device.publishAsync(deviceTopic(id, 'events'), `{"v":${PROTOCOL_VERSION},"events":[${telemetryText(1)}]}`, { qos: 1 });
      await waitFor(() => bridge.stats().eventsStored === 1, 'the first batch stored');
      await device.endAsync();
      await bridge.close();
      await server.endAsync();
    } finally {
      await broker.close();
      store.close();
      dir.remove();
    }
  });

  it('checks device passwords off the event loop with the same verdicts as the blocking check', async () => {
    const dir = tempDir('bus-credentials');
    const store = openStore(dir.path);
    try {
      const { password } = store.devices.enrol({ id: 'gh-cred-01', deviceClassId: 'gh-scout-a', tags: [], actor: 'test', at: new Date().toISOString() })!;
      const cases: Array<[string, string]> = [['gh-cred-01', password], ['gh-cred-01', `${password}x`], ['gh-cred-99', password], ['gh-cred-01', password]];
      for (const [id, pw] of cases) expect(await store.devices.verifyCredentialsAsync(id, pw), `${id}`).toBe(store.devices.verifyCredentials(id, pw));
    } finally {
      store.close();
      dir.remove();
    }
  });
});
