/**
 * Fault: two `ocellus serve --replicas` processes on one data folder and one private Mosquitto; the one that
 * holds the leader lease is killed with SIGKILL in the middle of a staged rollout. The other must take the
 * lease over and finish the rollout from the stored state, assigning every device exactly once. Devices are
 * simulated MQTT clients that apply what they receive when the test lets them (tests/support/replica-rig.ts).
 * (Demo data: greenhouse scout A robots and the demo catalogue.)
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { createApiClient } from '../../src/api-client/api-client.js';
import { createClassRelease, loadScenario } from '../../src/demo/load-scenario.js';
import { DEMO_CATALOG_DIR } from '../../src/demo/scenario.js';
import { waitFor } from '../support/agent-fixtures.js';
import { MOSQUITTO_BINARY_SKIP_NOTE, mosquittoBinary, startPrivateMosquitto, type PrivateMosquitto } from '../support/bus-mosquitto-rig.js';
import { ADMIN_TOKEN, CLASS_A, freePort, startServerProcess, type ServerProcess } from '../support/fault-rig.js';
import { connectSimDevice, type SimDevice } from '../support/replica-rig.js';

if (!mosquittoBinary) console.warn(`replica kill: ${MOSQUITTO_BINARY_SKIP_NOTE}`);

let dir = '';
let broker: PrivateMosquitto | null = null;
const servers: ServerProcess[] = [];
const devices: SimDevice[] = [];

afterAll(async () => {
  await Promise.all(devices.map((d) => d.close().catch(() => undefined)));
  for (const s of servers) await s.kill();
  await broker?.stop();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

function readDb<T>(dataDir: string, read: (db: Database.Database) => T): T {
  const db = new Database(join(dataDir, 'ocellus.db'), { readonly: true, fileMustExist: true });
  try {
    return read(db);
  } finally {
    db.close();
  }
}

describe.skipIf(!mosquittoBinary)('replica holding the leader lease killed (SIGKILL) mid-rollout', () => {
  it('the other replica takes over and completes the rollout with exactly one assignment per device', async () => {
    dir = mkdtempSync(join(tmpdir(), 'ocellus-replica-kill-'));
    broker = await startPrivateMosquitto(dir);
    const dataDir = join(dir, 'server');
    // The lease is renewed every 200 ms and lasts 1 s, so a takeover comes within about a second of the kill.
    const replicaArgs = (id: string) => ['--broker', broker!.url, '--replicas', '--replica-group', 'kill-test', '--replica-id', id, '--leader-poll-ms', '200'];
    // One after the other: the first makes the signing key and stores the admin token.
    for (const id of ['rep-a', 'rep-b']) servers.push(await startServerProcess(dataDir, await freePort(), await freePort(), replicaArgs(id)));
    const api = createApiClient(servers[0]!.url, ADMIN_TOKEN);
    await loadScenario(api, DEMO_CATALOG_DIR);
    const releaseId = (await createClassRelease(api, CLASS_A)).release.id;

    const ids = Array.from({ length: 12 }, (_, i) => `gh-lease-${String(i + 1).padStart(2, '0')}`);
    for (const id of ids) await api.json('POST', '/api/v1/devices', { id, deviceClassId: CLASS_A.deviceClassId, tags: ['replica-kill-test'] });
    devices.push(...(await Promise.all(ids.map((id) => connectSimDevice(broker!.url, id)))));
    await waitFor(() => readDb(dataDir, (db) => db.prepare("SELECT COUNT(*) FROM device_state WHERE online = 1 AND device_id LIKE 'gh-lease-%'").pluck().get() === ids.length), 'every device online in the store', 20_000, 100);

    // Three waves (2, 4, 6 devices); the gate waits for no telemetry, only for each device to apply.
    const created = await api.json<{ id: string }>('POST', '/api/v1/rollouts', { releaseId, target: { deviceIds: ids }, waves: [2, 4], gate: { telemetryFrames: 0 } });
    // The first wave's devices have the release but do not apply it yet: the rollout is mid-wave.
    await waitFor(() => devices.filter((d) => d.releases.includes(releaseId)).length === 2, 'the first wave sent', 20_000, 50);
    const leader = readDb(dataDir, (db) => db.prepare("SELECT holder FROM leader_leases WHERE name = 'fleet-engines'").pluck().get()) as string;
    expect(['rep-a', 'rep-b']).toContain(leader);
    const killed = servers[leader === 'rep-a' ? 0 : 1]!;
    const survivor = servers[leader === 'rep-a' ? 1 : 0]!;
    await killed.kill();

    for (const d of devices) await d.applyReleases();
    const survivorApi = createApiClient(survivor.url, ADMIN_TOKEN);
    await waitFor(async () => (await survivorApi.json<{ status: string }>('GET', `/api/v1/rollouts/${created.id}`)).status === 'completed', 'the rollout completed on the surviving replica', 40_000, 100);

    expect(readDb(dataDir, (db) => db.prepare("SELECT holder FROM leader_leases WHERE name = 'fleet-engines'").pluck().get())).not.toBe(leader);
    const perDevice = readDb(dataDir, (db) => db.prepare('SELECT device_id AS id, COUNT(*) AS n FROM assignments WHERE cause = ? GROUP BY device_id').all(`rollout:${created.id}`)) as Array<{ id: string; n: number }>;
    expect(perDevice.map((r) => r.id).sort()).toEqual(ids);
    expect(perDevice.every((r) => r.n === 1)).toBe(true);
    expect(survivor.output.some((l) => l.includes('this server runs the rollout and calibration engines'))).toBe(true);
  }, 120_000);
});
