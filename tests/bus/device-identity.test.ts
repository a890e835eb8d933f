import { connect as tcpConnect } from 'node:net';
import mqtt, { type MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { busForServer } from '../../src/bus/start-bus.js';
import { deviceTopic } from '../../src/protocol/topics.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';
import { deviceClass, removeDir, tempDataDir } from '../support/api-fixtures.js';

// Demo data: greenhouse row robots gh-a-01 … enrolled on a server with its embedded broker on a free port.
const ADMIN = 'demo-data-admin-token-identity-0001';
let dir: string;
let server: RunningServer;
let brokerUrl: string;
const logs: string[] = [];
const passwords = new Map<string, string>();

async function call(method: string, path: string, body?: unknown) {
  const res = await fetch(`${server.url}${path}`, {
    method,
    headers: { authorization: `Bearer ${ADMIN}`, 'content-type': 'application/json' },
    ...(body !== undefined ? { body: JSON.stringify(body) } : {}),
  });
  return { status: res.status, body: (await res.json()) as Record<string, unknown> };
}

async function enrol(id: string): Promise<string> {
  const r = await call('POST', '/api/v1/devices', { id, deviceClassId: deviceClass.id, tags: [] });
  expect(r.status).toBe(201);
  const password = (r.body.mqtt as { password: string }).password;
  passwords.set(id, password);
  return password;
}

function connectDevice(clientId: string, username: string, password: string): Promise<MqttClient> {
  return mqtt.connectAsync(brokerUrl, { clientId, username, password, reconnectPeriod: 0, connectTimeout: 5000, clean: true });
}

/** Resolves to the reason the broker closed the client, or 'still-open' when it stayed up until the deadline. */
function closedWithin(client: MqttClient, ms: number): Promise<'closed' | 'still-open'> {
  return new Promise((resolve) => {
    const timer = setTimeout(() => resolve('still-open'), ms);
    client.once('close', () => {
      clearTimeout(timer);
      resolve('closed');
    });
  });
}

function metric(name: string, labels: string): number {
  const line = server.metrics.render().split('\n').find((l) => l.startsWith(`${name}{`) && l.includes(labels));
  return line ? Number(line.split(' ').at(-1)) : 0;
}

beforeAll(async () => {
  dir = tempDataDir();
  server = await startServer({
    dataDir: dir,
    port: 0,
    adminToken: ADMIN,
    bus: busForServer({ embedded: { port: 0 }, eventWriter: 'inline' }),
    log: (line) => logs.push(line),
  });
  brokerUrl = server.bus!.replace(/^embedded MQTT broker at /, '');
  expect((await call('POST', '/api/v1/device-classes', deviceClass)).status).toBe(201);
  for (const id of ['gh-a-01', 'gh-a-02', 'gh-a-03', 'gh-a-04', 'gh-a-05', 'gh-a-06']) await enrol(id);
});
afterAll(async () => {
  await server?.close();
  removeDir(dir);
});

describe('device identity on the embedded broker', () => {
  it("refuses gh-a-01's credentials under client id gh-a-02, eight times over, while gh-a-02 stays online", async () => {
    const victim = await connectDevice('gh-a-02', 'gh-a-02', passwords.get('gh-a-02')!);
    const victimClosed = closedWithin(victim, 1500);
    for (let i = 0; i < 8; i++) {
      await expect(connectDevice('gh-a-02', 'gh-a-01', passwords.get('gh-a-01')!)).rejects.toThrow(/Identifier rejected/);
    }
    expect(await victimClosed).toBe('still-open');
    // Still online: its publish goes through and the bridge stores it.
    await victim.publishAsync(deviceTopic('gh-a-02', 'state'), JSON.stringify({ v: 1 }), { qos: 1 });
    expect(victim.connected).toBe(true);
    expect(metric('ocellus_device_login_failures_total', 'reason="client-id-mismatch"')).toBeGreaterThanOrEqual(8);
    await victim.endAsync();
  });

  it('keeps the live session when a second CONNECT uses the same credentials, and admits one once it ends', async () => {
    const pw = passwords.get('gh-a-03')!;
    const first = await connectDevice('gh-a-03', 'gh-a-03', pw);
    const firstClosed = closedWithin(first, 1500);
    await expect(connectDevice('gh-a-03', 'gh-a-03', pw)).rejects.toThrow(/Identifier rejected/);
    expect(await firstClosed).toBe('still-open');
    await first.endAsync();
    const deadline = Date.now() + 5000;
    let second: MqttClient | null = null;
    while (!second && Date.now() < deadline) second = await connectDevice('gh-a-03', 'gh-a-03', pw).catch(() => null);
    expect(second?.connected).toBe(true);
    await second!.endAsync();
  });

  it('lets one credential hold one session, not 150', async () => {
    const pw = passwords.get('gh-a-04')!;
    const attempts = await Promise.allSettled(Array.from({ length: 150 }, () => connectDevice('gh-a-04', 'gh-a-04', pw)));
    const open = attempts.filter((a): a is PromiseFulfilledResult<MqttClient> => a.status === 'fulfilled').map((a) => a.value);
    expect(open.length).toBe(1);
    await Promise.all(open.map((c) => c.endAsync()));
  });

  it('revocation ends the live session at once and refuses the credentials after it', async () => {
    const pw = passwords.get('gh-a-05')!;
    const client = await connectDevice('gh-a-05', 'gh-a-05', pw);
    const closed = closedWithin(client, 3000);
    const r = await call('POST', '/api/v1/devices/gh-a-05/revoke');
    expect(r.status).toBe(200);
    expect(r.body.session).toBe('closed');
    expect(await closed).toBe('closed');
    await expect(connectDevice('gh-a-05', 'gh-a-05', pw)).rejects.toThrow(/Bad username or password/);
    const audit = await call('GET', '/api/v1/audit?target=device/gh-a-05');
    expect(JSON.stringify(audit.body)).toContain('device.revoke');
  });

  it('rotating a password ends the session on the old one; only the new one logs in', async () => {
    const old = passwords.get('gh-a-06')!;
    const client = await connectDevice('gh-a-06', 'gh-a-06', old);
    const closed = closedWithin(client, 3000);
    const r = await call('POST', '/api/v1/devices/gh-a-06/rotate-password');
    expect(r.status).toBe(200);
    expect(await closed).toBe('closed');
    const fresh = (r.body.mqtt as { password: string }).password;
    await expect(connectDevice('gh-a-06', 'gh-a-06', old)).rejects.toThrow(/Bad username or password/);
    const again = await connectDevice('gh-a-06', 'gh-a-06', fresh);
    expect(again.connected).toBe(true);
    await again.endAsync();
    expect((await call('POST', '/api/v1/devices/gh-zz-99/revoke')).status).toBe(404);
  });
});

describe('MQTT packet size limits', () => {
  it('closes a connection whose CONNECT claims 200 MB before reading its body, and counts it', async () => {
    const before = metric('ocellus_mqtt_oversized_packets_total', 'phase="before-connect"');
    const { port } = new URL(brokerUrl);
    const socket = tcpConnect(Number(port), '127.0.0.1');
    await new Promise<void>((resolve) => socket.once('connect', () => resolve()));
    // Fixed header: CONNECT (0x10), remaining length 200 MiB as an MQTT variable-length integer (§2.2.3).
    let n = 200 * 1024 * 1024;
    const length: number[] = [];
    do {
      let byte = n % 128;
      n = Math.floor(n / 128);
      if (n > 0) byte |= 0x80;
      length.push(byte);
    } while (n > 0);
    const closed = new Promise<void>((resolve) => socket.once('close', () => resolve()));
    socket.on('error', () => undefined);
    socket.write(Buffer.from([0x10, ...length]));
    const chunk = Buffer.alloc(64 * 1024, 0x41);
    let sentBytes = 0;
    // Keep streaming until the server closes (bounded: 16 MB at most).
    while (!socket.destroyed && sentBytes < 16 * 1024 * 1024) {
      if (!socket.write(chunk)) await new Promise((r) => setTimeout(r, 5));
      sentBytes += chunk.length;
      if (socket.destroyed) break;
      await new Promise((r) => setImmediate(r));
    }
    await closed;
    expect(sentBytes).toBeLessThan(16 * 1024 * 1024);
    expect(metric('ocellus_mqtt_oversized_packets_total', 'phase="before-connect"')).toBe(before + 1);
  });

  it('closes a logged-in device that sends a packet over the limit after CONNECT', async () => {
    const id = 'gh-a-01';
    const before = metric('ocellus_mqtt_oversized_packets_total', 'phase="after-connect"');
    const client = await connectDevice(id, id, passwords.get(id)!);
    const closed = closedWithin(client, 5000);
    client.on('error', () => undefined);
    client.publish(deviceTopic(id, 'events'), Buffer.alloc(2 * 1024 * 1024, 0x20), { qos: 0 });
    expect(await closed).toBe('closed');
    expect(metric('ocellus_mqtt_oversized_packets_total', 'phase="after-connect"')).toBe(before + 1);
    client.end(true);
  });
});

describe('failed logins and refusal logs', () => {
  it('counts bad passwords and, past the per-source limit, refuses further tries unchecked', async () => {
    const results = [];
    for (let i = 0; i < 25; i++) results.push(await connectDevice('gh-a-02', 'gh-a-02', `wrong-${i}`).then(() => 'in', (e: Error) => e.message));
    expect(results.slice(0, 10).every((m) => /Bad username or password/.test(m))).toBe(true);
    expect(results.slice(-3).every((m) => /Not authorized/.test(m))).toBe(true);
    expect(metric('ocellus_device_login_failures_total', 'reason="bad-credentials"')).toBeGreaterThanOrEqual(10);
    expect(metric('ocellus_device_login_failures_total', 'reason="id-limited"') + metric('ocellus_device_login_failures_total', 'reason="source-limited"')).toBeGreaterThanOrEqual(3);
  });

  it('writes refusals as JSON (a newline in a topic cannot forge a line) and at most five per kind and minute', async () => {
    const id = 'gh-a-01';
    // The test above left 10 failures on this source (under its limit of 20) and none on this id.
    const client = await connectDevice(id, id, passwords.get(id)!);
    const before = logs.length;
    for (let i = 0; i < 12; i++) {
      await client.subscribeAsync(`ocellus/v1/dev/gh-a-02/release\nocellus: FORGED line ${i}`, { qos: 1 }).catch(() => undefined);
    }
    const lines = logs.slice(before).filter((l) => l.includes('"refused":"subscribe"'));
    expect(lines.length).toBe(5);
    for (const line of lines) {
      expect(line).not.toContain('\n');
      expect(JSON.parse(line.replace(/^broker: /, ''))).toMatchObject({ refused: 'subscribe', by: `device ${id}` });
    }
    await client.endAsync();
  });
});
