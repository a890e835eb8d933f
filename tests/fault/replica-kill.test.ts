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
import { afterAll, describe, expect, it } from 'vitest';
import { createApiClient } from '../../src/api-client/api-client.js';
import { createClassRelease, loadScenario } from '../../src/demo/load-scenario.js';
import { DEMO_CATALOG_DIR } from '../../src/demo/scenario.js';
import { portOpen, waitFor } from '../support/agent-fixtures.js';
import { postgresUrlFor } from '../support/store-backend.js';
import { openStore, type Store } from '../../src/store/index.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';
import { MOSQUITTO_BINARY_SKIP_NOTE, mosquittoBinary, startPrivateMosquitto, type PrivateMosquitto } from '../support/bus-mosquitto-rig.js';
import { ADMIN_TOKEN, CLASS_A, freePort, startServerProcess, type ServerProcess } from '../support/fault-rig.js';
import { connectSimDevice, type SimDevice } from '../support/replica-rig.js';

if (!mosquittoBinary) console.warn(`replica kill: ${MOSQUITTO_BINARY_SKIP_NOTE}`);
const postgresUp = await portOpen(5432);
if (!postgresUp) console.warn('replica kill: PostgreSQL is not listening on 127.0.0.1:5432, so the PostgreSQL run is skipped');
const BACKENDS = ['sqlite', ...(postgresUp ? ['postgres' as const] : [])] as const;

const dirs: string[] = [];
const brokers: PrivateMosquitto[] = [];
const servers: ServerProcess[] = [];
const devices: SimDevice[] = [];
const stores: Store[] = [];

afterAll(async () => {
  await Promise.all(devices.map((d) => d.close().catch(() => undefined)));
  for (const s of servers) await s.kill();
  for (const b of brokers) await b.stop();
  for (const s of stores) s.close();
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

for (const backend of BACKENDS) {
describe.skipIf(!mosquittoBinary)(`${backend}: replica holding the leader lease killed (SIGKILL) mid-rollout`, () => {
  it('the other replica takes over and completes the rollout with exactly one assignment per device', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ocellus-replica-kill-'));
    dirs.push(dir);
    const broker = await startPrivateMosquitto(dir);
    brokers.push(broker);
    const dataDir = join(dir, 'server');
    const databaseUrl = backend === 'postgres' ? postgresUrlFor(dataDir) : undefined;
    // The test's own view of the shared store (the same file or the same PostgreSQL schema), opened once the servers made it.
    let view: Store | null = null;
    const readDb = <T>(_dataDir: string, read: (db: ReturnType<typeof sqlHandle>) => T): T => {
      if (!view) stores.push((view = databaseUrl ? openStore(join(dir, 'view'), { databaseUrl }) : openStore(dataDir)));
      return read(sqlHandle(view));
    };
    // The lease is renewed every 200 ms and lasts 1 s, so a takeover comes within about a second of the kill.
    const replicaArgs = (id: string) => [...(databaseUrl ? ['--database', databaseUrl] : []), '--broker', broker.url, '--replicas', '--replica-group', 'kill-test', '--replica-id', id, '--leader-poll-ms', '200'];
    // One after the other: the first makes the signing key and stores the admin token.
    const pair: ServerProcess[] = [];
    for (const id of ['rep-a', 'rep-b']) pair.push(await startServerProcess(dataDir, await freePort(), await freePort(), replicaArgs(id)));
    servers.push(...pair);
    const api = createApiClient(pair[0]!.url, ADMIN_TOKEN);
    await loadScenario(api, DEMO_CATALOG_DIR);
    const releaseId = (await createClassRelease(api, CLASS_A)).release.id;

    const ids = Array.from({ length: 12 }, (_, i) => `gh-lease-${String(i + 1).padStart(2, '0')}`);
    for (const id of ids) await api.json('POST', '/api/v1/devices', { id, deviceClassId: CLASS_A.deviceClassId, tags: ['replica-kill-test'] });
    const fleet = await Promise.all(ids.map((id) => connectSimDevice(broker.url, id)));
    devices.push(...fleet);
    await waitFor(() => readDb(dataDir, (db) => db.prepare("SELECT COUNT(*) FROM device_state WHERE online = 1 AND device_id LIKE 'gh-lease-%'").pluck().get() === ids.length), 'every device online in the store', 20_000, 100);

    // Three waves (2, 4, 6 devices); the gate waits for no telemetry, only for each device to apply.
    const created = await api.json<{ id: string }>('POST', '/api/v1/rollouts', { releaseId, target: { deviceIds: ids }, waves: [2, 4], gate: { telemetryFrames: 0 } });
    // The first wave's devices have the release but do not apply it yet: the rollout is mid-wave.
    await waitFor(() => fleet.filter((d) => d.releases.includes(releaseId)).length === 2, 'the first wave sent', 20_000, 50);
    const leader = readDb(dataDir, (db) => db.prepare("SELECT holder FROM leader_leases WHERE name = 'fleet-engines'").pluck().get()) as string;
    expect(['rep-a', 'rep-b']).toContain(leader);
    const killed = pair[leader === 'rep-a' ? 0 : 1]!;
    const survivor = pair[leader === 'rep-a' ? 1 : 0]!;
    await killed.kill();

    for (const d of fleet) await d.applyReleases();
    const survivorApi = createApiClient(survivor.url, ADMIN_TOKEN);
    await waitFor(async () => (await survivorApi.json<{ status: string }>('GET', `/api/v1/rollouts/${created.id}`)).status === 'completed', 'the rollout completed on the surviving replica', 40_000, 100);

    expect(readDb(dataDir, (db) => db.prepare("SELECT holder FROM leader_leases WHERE name = 'fleet-engines'").pluck().get())).not.toBe(leader);
    const perDevice = readDb(dataDir, (db) => db.prepare('SELECT device_id AS id, COUNT(*) AS n FROM assignments WHERE cause = ? GROUP BY device_id').all(`rollout:${created.id}`)) as Array<{ id: string; n: number }>;
    expect(perDevice.map((r) => r.id).sort()).toEqual(ids);
    expect(perDevice.every((r) => r.n === 1)).toBe(true);
    expect(survivor.output.some((l) => l.includes('this server runs the rollout and calibration engines'))).toBe(true);
  }, 120_000);
});
}
