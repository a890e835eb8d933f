/**
 * The change feed between replicas over a private Mosquitto (MQTT 5): a change sent by one replica reaches the
 * others once and never comes back to its sender (No Local, MQTT 5.0 §3.8.3.1); a message that is not one of
 * ours is dropped with a log line. A replica whose connection breaks is announced to the others by its last will,
 * which the broker publishes on an abnormal disconnect (MQTT 5.0 §3.1.2.5), and not on a clean one.
 */
import mqtt from 'mqtt';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createChangeRelay, replicaLostWill } from '../../src/bus/change-relay.js';
import { SERVER_CHANGES_TOPIC } from '../../src/protocol/topics.js';
import { waitFor } from '../support/agent-fixtures.js';
import { MOSQUITTO_BINARY_SKIP_NOTE, mosquittoBinary, startPrivateMosquitto, type PrivateMosquitto } from '../support/bus-mosquitto-rig.js';

if (!mosquittoBinary) console.warn(`change relay: ${MOSQUITTO_BINARY_SKIP_NOTE}`);

describe.skipIf(!mosquittoBinary)('change relay between replicas', () => {
  let dir: string;
  let broker: PrivateMosquitto;
  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'ocellus-relay-'));
    broker = await startPrivateMosquitto(dir);
  });
  afterAll(async () => {
    await broker?.stop();
    rmSync(dir, { recursive: true, force: true });
  });

  it('delivers a change to the other replica only, and drops what is not JSON', async () => {
    const connect = (id: string) => mqtt.connectAsync(broker.url, { clientId: id, protocolVersion: 5, reconnectPeriod: 0 });
    const [ca, cb] = await Promise.all([connect('relay-a'), connect('relay-b')]);
    const logs: string[] = [];
    const a = createChangeRelay({ client: ca, replicaId: 'rep-a' });
    const b = createChangeRelay({ client: cb, replicaId: 'rep-b', log: (l) => logs.push(l) });
    await Promise.all([a.subscribed(), b.subscribed()]);
    const atA: unknown[] = [];
    const atB: Array<[unknown, string]> = [];
    a.onRemote((change) => atA.push(change));
    b.onRemote((change, from) => atB.push([change, from]));
    try {
      await ca.publishAsync(SERVER_CHANGES_TOPIC, 'not json', { qos: 1 });
      const change = { kind: 'api', method: 'PUT', route: '/api/v1/profiles/:id', path: '/api/v1/profiles/fruit-counting-a' };
      a.send(change);
      // B answers, so A has seen everything B had seen before it (one broker, QoS 1, in order per client).
      await waitFor(() => atB.length === 1, 'the change at replica B', 10_000);
      b.send({ kind: 'devices', deviceIds: ['gh-a-01'] });
      await waitFor(() => atA.length === 1, 'B\'s change at replica A', 10_000);
      expect(atB).toEqual([[change, 'rep-a']]);
      expect(atA).toEqual([{ kind: 'devices', deviceIds: ['gh-a-01'] }]);
      expect(logs).toContain('relay: dropped a change message that is not JSON');
    } finally {
      a.close();
      b.close();
      await Promise.all([ca.endAsync(), cb.endAsync()]);
    }
  });

  it('announces a replica whose connection broke (its will), not one that disconnected cleanly', async () => {
    const connectAs = (id: string, replicaId: string) => mqtt.connectAsync(broker.url, {
      clientId: id, protocolVersion: 5, reconnectPeriod: 0,
      will: { topic: SERVER_CHANGES_TOPIC, payload: Buffer.from(replicaLostWill(replicaId)), qos: 1, retain: false },
    });
    const [ca, cb, cc] = await Promise.all([connectAs('lost-a', 'rep-a'), connectAs('lost-b', 'rep-b'), connectAs('lost-c', 'rep-c')]);
    const a = createChangeRelay({ client: ca, replicaId: 'rep-a' });
    await a.subscribed();
    const lost: string[] = [];
    const changes: unknown[] = [];
    a.onReplicaLost((id) => lost.push(id));
    a.onRemote((change) => changes.push(change));
    try {
      // rep-c stops cleanly (DISCONNECT: no will); rep-b's socket is torn down as a killed process's would be.
      await cc.endAsync();
      cb.stream.destroy();
      await waitFor(() => lost.length === 1, 'the will of replica B at replica A', 10_000);
      // A change sent after both, answered in order: no announcement for rep-c is on its way.
      const cd = await mqtt.connectAsync(broker.url, { clientId: 'lost-d', protocolVersion: 5, reconnectPeriod: 0 });
      await cd.publishAsync(SERVER_CHANGES_TOPIC, JSON.stringify({ from: 'rep-d', change: { kind: 'devices', deviceIds: ['gh-a-02'] } }), { qos: 1 });
      await waitFor(() => changes.length === 1, 'the later change at replica A', 10_000);
      await cd.endAsync();
      expect(lost).toEqual(['rep-b']);
      expect(changes).toEqual([{ kind: 'devices', deviceIds: ['gh-a-02'] }]);
    } finally {
      a.close();
      await ca.endAsync();
    }
  });
});
