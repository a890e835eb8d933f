/**
 * A rig for the replica tests: simulated devices as in-process MQTT clients speaking the device protocol
 * (state, events, acks, releases), for a private Mosquitto that several server replicas share. They stand in
 * for agents where the test is about the server side (how many devices, which replica stored what), not about
 * the agent. Demo data throughout (greenhouse scouts).
 */
import mqtt, { type MqttClient } from 'mqtt';
import { PROTOCOL_VERSION, deviceTopic, type StateMessage } from '../../src/protocol/index.js';

export function stateOf(online: boolean, release: { id: string; version: number } | null, lastSeq = 0): StateMessage {
  return {
    v: PROTOCOL_VERSION, online, agentVersion: 'replica-test', ts: new Date().toISOString(),
    releaseId: release?.id ?? null, releaseVersion: release?.version ?? null,
    activeTask: null, profileId: null, profileRevision: null, moving: false, pending: null, refused: null, lastSeq,
  };
}

export interface SimDevice {
  id: string;
  client: MqttClient;
  /** Every ack received (upTo), in order. */
  acks: number[];
  maxAck(): number;
  /** Ids of the releases received, in order (retained copies included). */
  releases: string[];
  /** Publishes events seq..seq+count-1 as one batch (QoS 1), as the agent's outbox does. */
  sendEvents(fromSeq: number, count: number): Promise<void>;
  /** Applies every release received so far and from now on: reports it as running (an online state). */
  applyReleases(): Promise<void>;
  close(): Promise<void>;
}

/** Connects a device, reports it online and listens for acks and releases; releases wait for applyReleases() unless `apply`. */
export async function connectSimDevice(url: string, id: string, options: { apply?: boolean } = {}): Promise<SimDevice> {
  const client = await mqtt.connectAsync(url, {
    username: id, password: 'unused', clientId: id, clean: true, reconnectPeriod: 200,
    will: { topic: deviceTopic(id, 'state'), payload: Buffer.from(JSON.stringify({ ...stateOf(false, null), offlineReason: 'connection-lost' })), qos: 1, retain: true },
  });
  const acks: number[] = [];
  const releases: string[] = [];
  const received: Array<{ id: string; version: number }> = [];
  let applying = options.apply ?? false;
  let running: { id: string; version: number } | null = null;
  const report = (r: { id: string; version: number }) => {
    running = r;
    return client.publishAsync(deviceTopic(id, 'state'), JSON.stringify(stateOf(true, r)), { qos: 1, retain: true });
  };
  client.on('message', (topic, payload) => {
    if (topic === deviceTopic(id, 'ack')) acks.push((JSON.parse(payload.toString()) as { upTo: number }).upTo);
    if (topic === deviceTopic(id, 'release') && payload.length > 0) {
      const r = (JSON.parse(payload.toString()) as { release: { id: string; version: number } }).release;
      releases.push(r.id);
      received.push({ id: r.id, version: r.version });
      if (applying) void report(r);
    }
  });
  await client.subscribeAsync([deviceTopic(id, 'ack'), deviceTopic(id, 'release')], { qos: 1 });
  await client.publishAsync(deviceTopic(id, 'state'), JSON.stringify(stateOf(true, null)), { qos: 1, retain: true });
  return {
    id, client, acks, releases,
    maxAck: () => Math.max(0, ...acks),
    sendEvents: async (fromSeq, count) => {
      const events = Array.from({ length: count }, (_, i) => ({ seq: fromSeq + i, ts: new Date().toISOString(), type: 'motion', moving: (fromSeq + i) % 2 === 0 }));
      await client.publishAsync(deviceTopic(id, 'events'), JSON.stringify({ v: PROTOCOL_VERSION, events }), { qos: 1 });
    },
    applyReleases: async () => {
      applying = true;
      const last = received.at(-1);
      if (last && running?.id !== last.id) await report(last);
    },
    close: async () => {
      // Clears the retained state, so the shared broker holds nothing of this test afterwards.
      await client.publishAsync(deviceTopic(id, 'state'), Buffer.alloc(0), { qos: 1, retain: true });
      await client.endAsync();
    },
  };
}
