/**
 * A signed release leaves the server as the exact text that was stored: the assignment path and the
 * embedded broker's restart path both send the stored bytes, never a re-serialized parsed copy (parsing
 * may add defaults the signature does not cover). Real SQLite in a temporary folder, the embedded MQTT
 * broker on a free port (demo data: greenhouse row cameras).
 */
import mqtt from 'mqtt';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { startBus } from '../../src/bus/start-bus.js';
import { assignRelease } from '../../src/fleet/rollout/assign.js';
import { verifyRelease } from '../../src/protocol/verify-release.js';
import type { SignedReleaseText } from '../../src/protocol/release.js';
import { deviceTopic } from '../../src/protocol/topics.js';
import { openStore, type Store } from '../../src/store/index.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, keys, sign, tempDir } from '../support/agent-fixtures.js';

const tasks = { rows: demoTask('rows-net', demoWeights('bytes rows-net'), 0.5, 4) };
const at = '2025-03-01T06:00:00.000Z';
let dir: { path: string; remove(): void };
let store: Store;
/** The stored text: pretty-printed with keys in reverse order, so any re-serialization would differ from it. */
let storedText: string;

function reversed(value: unknown): unknown {
  if (Array.isArray(value)) return value.map(reversed);
  if (value === null || typeof value !== 'object') return value;
  return Object.fromEntries(Object.entries(value).reverse().map(([k, v]) => [k, reversed(v)]));
}

beforeEach(() => {
  dir = tempDir('release-bytes');
  store = openStore(dir.path);
  const signed = sign(demoRelease('gh-bytes-1', 1, tasks));
  storedText = JSON.stringify(reversed(signed), null, 2);
  sqliteHandle(store)
    .prepare('INSERT INTO releases (id, device_class_id, version, signed, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)')
    .run('gh-bytes-1', demoDeviceClass.id, 1, storedText, at, 'test (demo data)');
  store.devices.enrol({ id: 'gh-bytes-01', deviceClassId: demoDeviceClass.id, tags: [], actor: 'test', at });
});
afterEach(() => {
  store.close();
  dir.remove();
});

describe('signed release bytes', () => {
  it('reads a stored release as its raw text and a parsed copy that still verifies', () => {
    const r = store.releases.get('gh-bytes-1')!;
    expect(r.raw).toBe(storedText);
    expect(JSON.stringify(r.parsed)).not.toBe(storedText);
    // Ed25519 over canonical JSON of the release (RFC 8032; key order does not matter to canonical JSON, RFC 8785).
    expect(verifyRelease(JSON.parse(r.raw), keys.publicKeyPem, demoDeviceClass.id).ok).toBe(true);
  });

  it('names the release when its stored text no longer reads as a signed release', () => {
    sqliteHandle(store).prepare('UPDATE releases SET signed = ? WHERE id = ?').run('{"release":{"id":"gh-bytes-1"}}', 'gh-bytes-1');
    expect(() => store.releases.get('gh-bytes-1')).toThrow(/stored release 'gh-bytes-1' does not read as a signed release at release\./);
  });

  it('sends the stored text byte for byte when a release is assigned', async () => {
    const sent: string[] = [];
    const publisher = { publishRelease: async (_deviceId: string, release: SignedReleaseText) => void sent.push(release.raw) };
    const result = await assignRelease(store, publisher, { deviceId: 'gh-bytes-01', releaseId: 'gh-bytes-1', actor: 'test operator', cause: 'manual', at });
    expect(result.ok && result.publish).toEqual({ status: 'sent' });
    expect(sent).toEqual([storedText]);
  });

  it('republishes the stored text byte for byte when the embedded broker starts', async () => {
    store.devices.assign({ deviceId: 'gh-bytes-01', releaseId: 'gh-bytes-1', cause: 'manual', actor: 'test operator', at });
    const serverUser = { username: 'bytes-server', password: 'bytes-secret-0123456789' };
    const bus = await startBus({ store, embedded: { port: 0, serverUser }, eventWriter: 'inline' });
    const client = await mqtt.connectAsync(bus.brokerUrl, { ...serverUser, clientId: `bytes-check-${process.pid}`, reconnectPeriod: 0, connectTimeout: 5000 });
    try {
      const received = new Promise<Buffer>((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error('no retained release within 5 s')), 5000);
        client.on('message', (_topic, payload) => {
          clearTimeout(timer);
          resolve(payload);
        });
      });
      await client.subscribeAsync(deviceTopic('gh-bytes-01', 'release'), { qos: 1 });
      expect((await received).toString('utf8')).toBe(storedText);
    } finally {
      await client.endAsync(true);
      await bus.close();
    }
  });
});
