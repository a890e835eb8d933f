import mqtt, { type MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBus, type Bus } from '../../src/bus/start-bus.js';
import { PROTOCOL_VERSION, deviceTopic } from '../../src/protocol/index.js';
import { openStore, type Store } from '../../src/store/index.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';
import { tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';

// A wiped agent makes a new event log with a new epoch and numbers its events from 1 again. The server must keep
// those events (not drop them as repeats of the old log's seqs) and still recognise a replay of the old log.

const E1 = 'a1b2c3d4e5f60718293a4b5c6d7e8f90';
const E2 = '0f1e2d3c4b5a69788796a5b4c3d2e1f0';

function batch(seqs: number[], epoch?: string, label = 'x') {
  const events = seqs.map((seq) => ({ seq, ts: new Date().toISOString(), type: 'motion', moving: label === 'new' }));
  return JSON.stringify(epoch === undefined ? { v: PROTOCOL_VERSION, events } : { v: PROTOCOL_VERSION, epoch, events });
}

let dir: { path: string; remove(): void };
let store: Store;
let bus: Bus;

beforeAll(async () => {
  dir = tempDir('epochs');
  store = openStore(dir.path);
  bus = await startBus({ store, embedded: { port: 0, serverUser: { username: 'test-server', password: 'test-server-secret' } } });
});
afterAll(async () => {
  await bus.close();
  store.close();
  dir.remove();
});

async function device(id: string): Promise<{ client: MqttClient; acks: Array<Record<string, unknown>> }> {
  const password = store.devices.enrol({ id, deviceClassId: 'gh-rowcam-a', tags: [], actor: 'test', at: new Date().toISOString() })!.password;
  const client = await mqtt.connectAsync(bus.brokerUrl, { username: id, password, clientId: id, reconnectPeriod: 0 });
  const acks: Array<Record<string, unknown>> = [];
  client.on('message', (_t, p) => acks.push(JSON.parse(p.toString()) as Record<string, unknown>));
  await client.subscribeAsync(deviceTopic(id, 'ack'), { qos: 1 });
  return { client, acks };
}

const stored = (id: string) =>
  sqliteHandle(store).prepare('SELECT seq, event FROM device_events WHERE device_id = ? ORDER BY seq').all(id) as Array<{ seq: number; event: string }>;

describe('event-log epochs on the bridge', () => {
  it('keeps a wiped agent’s renumbered events, notes the restart, and acks with the epoch', async () => {
    const id = uniqueDeviceId('wiped');
    const d = await device(id);
    // An agent without epochs (the legacy epoch): acks carry none, as older agents expect.
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1, 2, 3]), { qos: 1 });
    await waitFor(() => d.acks.length >= 1, 'legacy ack');
    expect(d.acks.at(-1)).toEqual({ v: PROTOCOL_VERSION, upTo: 3 });

    // The data folder is wiped: a new log, a new epoch, seqs from 1 again.
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1, 2], E1, 'new'), { qos: 1 });
    await waitFor(() => d.acks.some((a) => a.epoch === E1), 'ack of the new epoch');
    expect(d.acks.at(-1)).toEqual({ v: PROTOCOL_VERSION, upTo: 2, epoch: E1 });
    const rows = stored(id);
    expect(rows.map((r) => r.seq)).toEqual([1, 2, 3, 4, 5]);
    // The device's own numbering stays in the stored event; the stored seq goes on increasing with time.
    expect(rows.slice(3).map((r) => JSON.parse(r.event) as { seq: number; moving: boolean })).toMatchObject([{ seq: 1, moving: true }, { seq: 2, moving: true }]);
    const notes = store.deviceConnections.latest(id, 10).filter((c) => c.cause === 'event-log-restarted');
    expect(notes).toHaveLength(1);
    await d.client.endAsync();
  });

  it('still deduplicates a replay of the old epoch’s batch, and sends it no ack', async () => {
    const id = uniqueDeviceId('replay');
    const d = await device(id);
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1, 2, 3], E1), { qos: 1 });
    await waitFor(() => d.acks.length >= 1, 'first epoch acked');
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1], E2, 'new'), { qos: 1 });
    await waitFor(() => d.acks.some((a) => a.epoch === E2), 'second epoch acked');
    const before = bus.bridge.stats();
    const acksBefore = d.acks.length;
    // The old log's batch again, and one seq beyond what it had when the new epoch began (no room is left for it).
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1, 2, 3, 4], E1), { qos: 1 });
    await waitFor(() => bus.bridge.stats().eventsDuplicate >= before.eventsDuplicate + 4, 'replay counted as duplicates');
    expect(bus.bridge.stats().eventsStored).toBe(before.eventsStored);
    expect(stored(id).map((r) => r.seq)).toEqual([1, 2, 3, 4]);
    // A replay of the current epoch is deduplicated too, and acked with its epoch.
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1], E2, 'new'), { qos: 1 });
    await waitFor(() => d.acks.length > acksBefore, 'ack of the current epoch’s resend');
    expect(d.acks.slice(acksBefore)).toEqual([{ v: PROTOCOL_VERSION, upTo: 1, epoch: E2 }]);
    expect(stored(id)).toHaveLength(4);
    // Only one restart: the first epoch of a device that had stored nothing is not one.
    expect(store.deviceConnections.latest(id, 10).filter((c) => c.cause === 'event-log-restarted')).toHaveLength(1);
    await d.client.endAsync();
  });

  it('keeps the epochs across a server restart (read back from the database)', async () => {
    const id = uniqueDeviceId('reopen');
    const d = await device(id);
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1, 2], E1), { qos: 1 });
    await d.client.publishAsync(deviceTopic(id, 'events'), batch([1], E2), { qos: 1 });
    await waitFor(() => d.acks.some((a) => a.epoch === E2), 'second epoch acked');
    await d.client.endAsync();
    expect(store.deviceEventEpochs.list(id)).toMatchObject([{ epoch: E1, baseSeq: 0 }, { epoch: E2, baseSeq: 2 }]);
    // A second store on the same file (as after a restart) places a resend of the new epoch where it was.
    const again = openStore(dir.path);
    try {
      expect(again.deviceEventEpochs.list(id).map((e) => e.epoch)).toEqual([E1, E2]);
    } finally {
      again.close();
    }
  });
});
