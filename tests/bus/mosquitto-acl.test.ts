import { connect as tcpConnect } from 'node:net';
import mqtt, { type MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { classFreshnessTopic, deviceTopic } from '../../src/protocol/index.js';
import { tempDir, waitFor } from '../support/agent-fixtures.js';
import { MOSQUITTO_BINARY_SKIP_NOTE, mosquittoBinary, startPrivateMosquitto, type PrivateMosquitto } from '../support/bus-mosquitto-rig.js';

// The README's Mosquitto set-up (password file + the ACL of src/bus/mosquitto-config.ts), run for real.
const users = { server: 'ocellus-server', passwords: { 'ocellus-server': 'server-pw', 'dev-a': 'pw-a', 'dev-b': 'pw-b' } };

describe.skipIf(!mosquittoBinary)('Mosquitto with the Ocellus ACL (private broker on a free loopback port)', () => {
  let broker: PrivateMosquitto;
  const dir = tempDir('mosquitto-acl');
  const clients: MqttClient[] = [];
  beforeAll(async () => {
    broker = await startPrivateMosquitto(dir.path, users);
  });
  afterAll(async () => {
    for (const c of clients) await c.endAsync(true);
    await broker?.stop();
    dir.remove();
  });

  async function as(user: keyof typeof users.passwords, protocolVersion: 4 | 5 = 4) {
    const c = await mqtt.connectAsync(broker.url, { username: user, password: users.passwords[user], reconnectPeriod: 0, protocolVersion });
    clients.push(c);
    return c;
  }

  it('refuses a wrong password', async () => {
    await expect(mqtt.connectAsync(broker.url, { username: 'dev-a', password: 'nope', reconnectPeriod: 0 })).rejects.toThrow(/Not authorized|Bad username/);
  });

  it("delivers a device its own release, cmd and ack and nothing of device B's, even through a wildcard", async () => {
    const a = await as('dev-a');
    const got: string[] = [];
    a.on('message', (topic, payload) => got.push(`${topic}=${payload.toString()}`));
    const own = (['release', 'cmd', 'ack'] as const).map((c) => deviceTopic('dev-a', c));
    const foreign = (['release', 'cmd', 'ack'] as const).map((c) => deviceTopic('dev-b', c));
    // Mosquitto 2.0 may grant such a subscription; its read rules are applied to every delivery.
    await a.subscribeAsync([...own, ...foreign, 'ocellus/v1/dev/+/release'], { qos: 1 }).catch(() => undefined);
    const server = await as('ocellus-server');
    for (const t of foreign) await server.publishAsync(t, 'for-b', { qos: 1, retain: t.endsWith('/release') });
    for (const t of own) await server.publishAsync(t, 'for-a', { qos: 1 });
    await waitFor(() => got.length >= 3, "A's own three messages");
    expect(got.filter((m) => m.includes('/dev-b/'))).toEqual([]);
    expect(got.filter((m) => m.endsWith('=for-a')).length).toBeGreaterThanOrEqual(3);
    await server.publishAsync(deviceTopic('dev-b', 'release'), Buffer.alloc(0), { qos: 1, retain: true });
  });

  it("does not pass on what device A publishes on device B's topics, but passes A's own", async () => {
    const server = await as('ocellus-server');
    const seen: string[] = [];
    server.on('message', (topic, payload) => seen.push(`${topic}=${payload.toString()}`));
    await server.subscribeAsync('ocellus/v1/dev/#', { qos: 1 });
    const a = await as('dev-a');
    await a.publishAsync(deviceTopic('dev-b', 'events'), 'forged', { qos: 1 });
    await a.publishAsync(deviceTopic('dev-b', 'state'), 'forged', { qos: 1 });
    await a.publishAsync(deviceTopic('dev-a', 'release'), 'self-made', { qos: 1 });
    await a.publishAsync(deviceTopic('dev-a', 'events'), 'own', { qos: 1 });
    await waitFor(() => seen.length > 0, 'own events delivered');
    expect(seen).toEqual([`${deviceTopic('dev-a', 'events')}=own`]);
  });

  it("delivers the class's freshness statement to a device, and passes on nothing a device publishes there", async () => {
    const topic = classFreshnessTopic('gh-rowcam-a');
    const a = await as('dev-a');
    const got: string[] = [];
    a.on('message', (t, payload) => got.push(`${t}=${payload.toString()}`));
    await a.subscribeAsync(topic, { qos: 1 });
    const server = await as('ocellus-server');
    const seen: string[] = [];
    server.on('message', (t, payload) => seen.push(`${t}=${payload.toString()}`));
    await server.subscribeAsync(topic, { qos: 1 });
    // Mosquitto drops a publish its ACL refuses without closing the connection (MQTT 3.1.1 has no refusal for it).
    await a.publishAsync(topic, 'forged', { qos: 1 });
    await server.publishAsync(topic, 'signed', { qos: 1 });
    await waitFor(() => got.length >= 1 && seen.length >= 1, 'the statement delivered');
    expect(got).toEqual([`${topic}=signed`]);
    expect(seen).toEqual([`${topic}=signed`]);
  });

  it("forces the client id to the user name: dev-a's credentials under client id dev-b leave dev-b online", async () => {
    const victim = await mqtt.connectAsync(broker.url, { clientId: 'dev-b', username: 'dev-b', password: 'pw-b', reconnectPeriod: 0 });
    clients.push(victim);
    let victimClosed = false;
    victim.once('close', () => (victimClosed = true));
    for (let i = 0; i < 5; i++) {
      const spoof = await mqtt.connectAsync(broker.url, { clientId: 'dev-b', username: 'dev-a', password: 'pw-a', reconnectPeriod: 0 });
      await spoof.endAsync();
    }
    await victim.publishAsync(deviceTopic('dev-b', 'state'), 'still here', { qos: 1 });
    expect(victimClosed).toBe(false);
    expect(victim.connected).toBe(true);
  });

  it('closes a connection whose CONNECT claims 200 MB (max_packet_size)', async () => {
    const socket = tcpConnect(broker.port, '127.0.0.1');
    await new Promise<void>((resolve) => socket.once('connect', () => resolve()));
    socket.on('error', () => undefined);
    const closed = new Promise<void>((resolve) => socket.once('close', () => resolve()));
    // CONNECT (0x10) with a remaining length of 200 MiB as an MQTT variable-length integer (§2.2.3).
    socket.write(Buffer.from([0x10, 0x80, 0x80, 0x80, 0x64]));
    let sentBytes = 0;
    const chunk = Buffer.alloc(64 * 1024);
    while (!socket.destroyed && sentBytes < 16 * 1024 * 1024) {
      socket.write(chunk);
      sentBytes += chunk.length;
      await new Promise((r) => setTimeout(r, 1));
    }
    await closed;
    expect(sentBytes).toBeLessThan(16 * 1024 * 1024);
  });
});

if (!mosquittoBinary) describe('Mosquitto ACL', () => it.skip(MOSQUITTO_BINARY_SKIP_NOTE, () => {}));
