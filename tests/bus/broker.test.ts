import mqtt, { type MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/bus/broker.js';
import { classFreshnessTopic, deviceTopic } from '../../src/protocol/index.js';

// Topic isolation is checked on the embedded broker: the system Mosquitto on 1883 runs its default
// configuration (anonymous access), so it cannot show per-device ACLs.
let broker: EmbeddedBroker;
const server = { username: 'srv', password: 'server-secret' };
const passwords: Record<string, string> = { 'dev-a': 'secret-a', 'dev-b': 'secret-b' };

beforeAll(async () => {
  broker = await startEmbeddedBroker({ port: 0, serverUser: server, authenticate: (id, pw) => passwords[id] === pw });
});
afterAll(async () => broker.close());

function connectAs(username: string, password: string): Promise<MqttClient> {
  // A device's client id is its user name; the server's account may use any.
  return mqtt.connectAsync(broker.url, { username, password, clientId: username === server.username ? `srv-${Math.random()}` : username, reconnectPeriod: 0, connectTimeout: 5000 });
}

async function grantsOf(client: MqttClient, filters: string[]): Promise<number[]> {
  try {
    return (await client.subscribeAsync(filters, { qos: 1 })).map((g) => g.qos);
  } catch (e) {
    return ((e as { packet?: { granted?: number[] } }).packet?.granted ?? []) as number[];
  }
}

describe('embedded broker', () => {
  it('refuses a wrong password and a user name that is not a device id', async () => {
    await expect(connectAs('dev-a', 'wrong')).rejects.toThrow(/Bad username or password/);
    await expect(connectAs('dev/#', 'x')).rejects.toThrow(/Bad username or password/);
  });

  it('lets a device subscribe to its own release, cmd and ack topics only', async () => {
    const a = await connectAs('dev-a', passwords['dev-a']!);
    const own = ['release', 'cmd', 'ack'].map((c) => deviceTopic('dev-a', c as 'release'));
    expect(await grantsOf(a, own)).toEqual([1, 1, 1]);
    const foreign = [
      deviceTopic('dev-b', 'release'),
      deviceTopic('dev-b', 'cmd'),
      deviceTopic('dev-b', 'ack'),
      deviceTopic('dev-a', 'state'),
      'ocellus/v1/dev/+/release',
      '#',
    ];
    // 0x80 is the SUBACK failure code (MQTT 3.1.1 §3.9.3).
    expect(await grantsOf(a, foreign)).toEqual([128, 128, 128, 128, 128, 128]);
    await a.endAsync();
  });

  it('never delivers what device A publishes on device B\'s topics, and cuts A off', async () => {
    const watcher = await connectAs(server.username, server.password);
    const seen: string[] = [];
    watcher.on('message', (topic) => seen.push(topic));
    await watcher.subscribeAsync('ocellus/v1/dev/#', { qos: 1 });
    const a = await connectAs('dev-a', passwords['dev-a']!);
    const closed = new Promise<void>((resolve) => a.once('close', () => resolve()));
    a.publish(deviceTopic('dev-b', 'events'), 'forged', { qos: 1 });
    await closed;
    // A's own topic still works for a fresh connection, and arrives after the refused one would have.
    const a2 = await connectAs('dev-a', passwords['dev-a']!);
    await a2.publishAsync(deviceTopic('dev-a', 'state'), 'own', { qos: 1 });
    await new Promise<void>((resolve) => {
      const check = () => (seen.includes(deviceTopic('dev-a', 'state')) ? resolve() : setTimeout(check, 10));
      check();
    });
    expect(seen).not.toContain(deviceTopic('dev-b', 'events'));
    expect(seen).toContain(deviceTopic('dev-a', 'state'));
    await Promise.all([a2.endAsync(), watcher.endAsync()]);
  });

  it('lets a device publish its own state and events but not its release', async () => {
    const a = await connectAs('dev-a', passwords['dev-a']!);
    await a.publishAsync(deviceTopic('dev-a', 'events'), 'x', { qos: 1 });
    const closed = new Promise<void>((resolve) => a.once('close', () => resolve()));
    a.publish(deviceTopic('dev-a', 'release'), 'self-signed', { qos: 1, retain: true });
    await closed;
    const watcher = await connectAs(server.username, server.password);
    const received: string[] = [];
    watcher.on('message', (topic, payload) => received.push(`${topic}=${payload.toString()}`));
    await watcher.subscribeAsync([deviceTopic('dev-a', 'release'), deviceTopic('dev-a', 'cmd')], { qos: 1 });
    // A retained release would be delivered right after the SUBACK, before this marker.
    await watcher.publishAsync(deviceTopic('dev-a', 'cmd'), 'marker', { qos: 1 });
    await new Promise<void>((resolve) => {
      const check = () => (received.length > 0 ? resolve() : setTimeout(check, 10));
      check();
    });
    expect(received).toEqual([`${deviceTopic('dev-a', 'cmd')}=marker`]);
    await watcher.endAsync();
  });

  it('lets a device read a device class’s freshness statement, by its exact topic only, and never publish one', async () => {
    const a = await connectAs('dev-a', passwords['dev-a']!);
    expect(await grantsOf(a, [classFreshnessTopic('gh-rowcam-a'), 'ocellus/v1/class/+/freshness', 'ocellus/v1/class/gh-rowcam-a/#'])).toEqual([1, 128, 128]);
    const closed = new Promise<void>((resolve) => a.once('close', () => resolve()));
    a.publish(classFreshnessTopic('gh-rowcam-a'), 'forged statement', { qos: 1, retain: true });
    await closed;
    const watcher = await connectAs(server.username, server.password);
    const received: string[] = [];
    watcher.on('message', (topic, payload) => received.push(`${topic}=${payload.toString()}`));
    await watcher.subscribeAsync(classFreshnessTopic('gh-rowcam-a'), { qos: 1 });
    await watcher.publishAsync(classFreshnessTopic('gh-rowcam-a'), 'marker', { qos: 1 });
    await new Promise<void>((resolve) => {
      const check = () => (received.length > 0 ? resolve() : setTimeout(check, 10));
      check();
    });
    expect(received).toEqual([`${classFreshnessTopic('gh-rowcam-a')}=marker`]);
    await watcher.publishAsync(classFreshnessTopic('gh-rowcam-a'), Buffer.alloc(0), { qos: 1, retain: true });
    await watcher.endAsync();
  });
});
