/**
 * Fault: hostile input against the server process. 10,000 malformed, oversized, wrong-version and
 * wrong-schema MQTT messages from an enrolled device, then fast-check-generated bodies for every JSON route
 * of the API over HTTP. The process must not crash or answer 500, /metrics must count each rejected message
 * by reason, and good input must still be stored afterwards. (Demo data.)
 */
import fc from 'fast-check';
import mqtt from 'mqtt';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ROUTES } from '../../src/api/index.js';
import { MAX_PAYLOAD_BYTES } from '../../src/protocol/limits.js';
import { deviceTopic } from '../../src/protocol/topics.js';
import { DEMO_CATALOG_DIR, demoRolloutRequest } from '../../src/demo/scenario.js';
import { waitFor } from '../support/agent-fixtures.js';
import { ADMIN_TOKEN, CLASS_A, startFaultSite, type FaultSite } from '../support/fault-rig.js';

const DEVICE = 'gh-flood-01';
let site: FaultSite | null = null;

beforeAll(async () => {
  site = await startFaultSite('input');
});

afterAll(async () => {
  await site?.close();
});

/** Each kind of bad message and how many of it: 10,000 in all. */
const BAD = {
  'malformed-json': 3000,
  'unknown-version': 2000,
  'wrong-schema': 3000,
  oversized: 2000,
} as const;

const event = (seq: number) => ({ seq, ts: '2026-01-01T00:00:00.000Z', type: 'motion', moving: false });

function badMessage(reason: keyof typeof BAD, i: number): { channel: 'events' | 'state'; payload: Buffer } {
  const channel = i % 2 === 0 ? 'events' : 'state';
  switch (reason) {
    case 'malformed-json': {
      const texts = ['{"v":1,"events":[', 'not json', '\u0000\u00ff\u0001', '{"v":1,}', `${'['.repeat(200)}`, '{"v":1,"events":[{"seq":1'];
      return { channel, payload: Buffer.from(`${texts[i % texts.length]}${i}x`) };
    }
    case 'unknown-version':
      return { channel, payload: Buffer.from(JSON.stringify(i % 3 === 0 ? { v: 2, events: [event(1)] } : i % 3 === 1 ? { v: '1', events: [event(1)] } : { events: [event(1)] })) };
    case 'wrong-schema': {
      if (channel === 'state') return { channel, payload: Buffer.from(JSON.stringify({ v: 1, online: 'yes', seq: i })) };
      const bodies = [
        { v: 1, events: [] },
        { v: 1, events: [{ ...event(1), seq: 0 }] },
        { v: 1, events: [{ ...event(1), type: 'teleport' }] },
        { v: 1, events: [{ ...event(1), extra: i }] },
        { v: 1, events: [{ ...event(1), ts: 'yesterday' }] },
        { v: 1, events: Array.from({ length: 501 }, (_, k) => event(k + 1)) },
      ];
      return { channel, payload: Buffer.from(JSON.stringify(bodies[i % bodies.length])) };
    }
    case 'oversized':
      // A few events batches over 256 KiB; the rest states over 16 KiB.
      return i % 20 === 0
        ? { channel: 'events', payload: Buffer.alloc(MAX_PAYLOAD_BYTES.events + 1 + i, 0x20) }
        : { channel: 'state', payload: Buffer.alloc(MAX_PAYLOAD_BYTES.state + 1 + i, 0x7b) };
  }
}

function metricValues(text: string, name: string): Map<string, number> {
  const out = new Map<string, number>();
  for (const line of text.split('\n')) {
    if (!line.startsWith(`${name}{`)) continue;
    const m = /^[^{]+\{([^}]*)\} (\S+)$/.exec(line);
    if (m) out.set(m[1]!, Number(m[2]));
  }
  return out;
}

async function metrics(s: FaultSite): Promise<string> {
  const res = await fetch(`${s.server.url}/metrics`, { headers: { authorization: `Bearer ${ADMIN_TOKEN}` } });
  expect(res.status).toBe(200);
  return res.text();
}

describe('hostile input against the server process', () => {
  it('10,000 bad MQTT messages are dropped and counted by reason; good events still get stored', async () => {
    const s = site!;
    const { mqtt: creds } = await s.api.json<{ mqtt: { username: string; password: string } }>('POST', '/api/v1/devices', { id: DEVICE, deviceClassId: CLASS_A.deviceClassId, tags: ['fault-test'] });
    const client = await mqtt.connectAsync(`mqtt://127.0.0.1:${s.mqttPort}`, { clientId: DEVICE, username: creds.username, password: creds.password, reconnectPeriod: 0 });
    try {
      const messages = Object.entries(BAD).flatMap(([reason, n]) => Array.from({ length: n }, (_, i) => badMessage(reason as keyof typeof BAD, i)));
      expect(messages).toHaveLength(10_000);
      for (let i = 0; i < messages.length; i += 250) {
        await Promise.all(messages.slice(i, i + 250).map((m) => client.publishAsync(deviceTopic(DEVICE, m.channel), m.payload, { qos: 1 })));
      }
      await waitFor(async () => {
        const counts = metricValues(await metrics(s), 'ocellus_mqtt_rejects_total');
        return Object.entries(BAD).every(([reason, n]) => (counts.get(`reason="${reason}"`) ?? 0) >= n);
      }, 'the server to count every rejected message', 60_000, 200);
      const counts = metricValues(await metrics(s), 'ocellus_mqtt_rejects_total');
      for (const [reason, n] of Object.entries(BAD)) expect(counts.get(`reason="${reason}"`), reason).toBe(n);

      // Still alive, and good events are stored.
      await client.publishAsync(deviceTopic(DEVICE, 'events'), JSON.stringify({ v: 1, events: [event(1), event(2), event(3)] }), { qos: 1 });
      await waitFor(() => s.readDb((db) => (db.prepare('SELECT COUNT(*) AS n FROM device_events WHERE device_id = ?').get(DEVICE) as { n: number }).n === 3), 'the good events to be stored', 30_000, 50);
      expect(s.server.child.exitCode).toBeNull();
    } finally {
      await client.endAsync();
    }
  });

  it('fast-check bodies for every JSON route get a 2xx or 4xx answer, never a 500; /metrics shows no 5xx', async () => {
    const s = site!;
    const demoProfile = JSON.parse(readFileSync(join(DEMO_CATALOG_DIR, 'task-profiles', 'fruit-counting-a.json'), 'utf8')) as Record<string, unknown>;
    const seeds: Record<string, unknown> = {
      'profiles.create': demoProfile,
      'profiles.update': demoProfile,
      validate: demoProfile,
      'releases.create': { deviceClassId: CLASS_A.deviceClassId, tasks: { 'fruit-counting': { profileId: 'fruit-counting-a', revision: 1 } }, defaultTask: 'fruit-counting' },
      'rollouts.create': demoRolloutRequest(s.releaseA, [DEVICE]),
      'devices.enrol': { id: 'gh-fuzz-01', deviceClassId: CLASS_A.deviceClassId, tags: [] },
      'devices.assign': { releaseId: s.releaseA },
    };
    const routes = ROUTES.filter((r) => r.body && !r.binaryBody);
    expect(routes.length).toBeGreaterThan(10);
    const ids = ['fruit-counting-a', CLASS_A.deviceClassId, DEVICE, s.releaseA, 'no-such-thing', '..', '%00'];
    const body = (key: string) =>
      fc.oneof(
        fc.jsonValue().map((v) => JSON.stringify(v)),
        fc.string({ maxLength: 200 }),
        // A valid body with one field replaced by anything, or dropped.
        fc.tuple(fc.nat(), fc.jsonValue(), fc.boolean()).map(([at, value, drop]) => {
          const seed = (seeds[key] ?? {}) as Record<string, unknown>;
          const keys = Object.keys(seed);
          if (keys.length === 0) return JSON.stringify(value);
          const copy: Record<string, unknown> = { ...seed };
          const k = keys[at % keys.length]!;
          if (drop) delete copy[k];
          else copy[k] = value;
          return JSON.stringify(copy);
        }),
      );
    const statuses: number[] = [];
    await fc.assert(
      fc.asyncProperty(
        fc.constantFrom(...routes).chain((r) => fc.tuple(fc.constant(r), body(r.key), fc.constantFrom(...ids))),
        async ([route, text, id]) => {
          const path = route.path.replace(/:[a-zA-Z]+/g, () => encodeURIComponent(id));
          const res = await fetch(`${s.server.url}${path}`, {
            method: route.method.toUpperCase(),
            headers: { authorization: `Bearer ${ADMIN_TOKEN}`, 'content-type': 'application/json' },
            body: text,
          });
          await res.arrayBuffer();
          statuses.push(res.status);
          return res.status < 500;
        },
      ),
      { numRuns: 400, seed: 20261201 },
    );
    expect(statuses.filter((st) => st >= 400 && st < 500).length).toBeGreaterThan(200);
    const http = metricValues(await metrics(s), 'ocellus_http_requests_total');
    expect([...http.keys()].filter((labels) => /status="5\d\d"/.test(labels))).toEqual([]);
    expect(s.server.child.exitCode).toBeNull();
    const whoami = await fetch(`${s.server.url}/api/v1/whoami`, { headers: { authorization: `Bearer ${ADMIN_TOKEN}` } });
    expect(whoami.status).toBe(200);
  });
});
