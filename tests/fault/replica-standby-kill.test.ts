/**
 * Fault: two `ocellus serve --replicas` processes on one store and one private Mosquitto; the replica that does
 * NOT hold the leader lease is frozen (SIGSTOP) while devices stream events, so the broker has handed it QoS 1
 * batches it never acknowledges, and is then killed with SIGKILL. The survivor must take all further
 * shared-subscription traffic, store every event exactly once (the devices resend what was not acked, as the
 * agent's outbox does), keep device state current and carry the rollout it leads on to the end.
 * A state message in flight to the dead replica is lost with it; the broker publishes the dead replica's last will
 * and the survivor reads every device's retained state again (src/bus/state-resync.ts).
 * Mosquitto 2.0 does not hand a dead shared-subscription member's unacknowledged messages to another member
 * (observed here; MQTT 5.0 §4.8.2 leaves it to the server), so nothing below waits for a redelivery.
 * Devices are simulated MQTT clients speaking the device protocol (tests/support/replica-rig.ts).
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
import { connectSimDevice, stateOf, type SimDevice } from '../support/replica-rig.js';
import { deviceTopic } from '../../src/protocol/index.js';

if (!mosquittoBinary) console.warn(`replica standby kill: ${MOSQUITTO_BINARY_SKIP_NOTE}`);
const postgresUp = await portOpen(5432);
if (!postgresUp) console.warn('replica standby kill: PostgreSQL is not listening on 127.0.0.1:5432, so the PostgreSQL run is skipped');
const BACKENDS = [...(postgresUp ? ['postgres' as const] : []), 'sqlite'] as const;

const dirs: string[] = [];
const brokers: PrivateMosquitto[] = [];
const servers: ServerProcess[] = [];
const devices: SimDevice[] = [];
const stores: Store[] = [];

afterAll(async () => {
  await Promise.all(devices.map((d) => d.close().catch(() => undefined)));
  for (const s of servers) {
    // A replica left frozen by a failed run must be able to die.
    if (s.child.exitCode === null && s.child.signalCode === null) s.child.kill('SIGCONT');
    await s.kill();
  }
  for (const b of brokers) await b.stop();
  for (const s of stores) s.close();
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

/** Events each device sends: 1–5 with both replicas up, 6–10 while the standby is frozen, 11–15 after its death. */
const PHASE = 5;
const TOTAL = 3 * PHASE;

for (const backend of BACKENDS) {
describe.skipIf(!mosquittoBinary)(`${backend}: the replica without the leader lease killed (SIGKILL) while devices stream events`, () => {
  it('the survivor stores every event exactly once, keeps device state current and finishes the rollout', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ocellus-replica-standby-kill-'));
    dirs.push(dir);
    const broker = await startPrivateMosquitto(dir);
    brokers.push(broker);
    const dataDir = join(dir, 'server');
    const databaseUrl = backend === 'postgres' ? postgresUrlFor(dataDir) : undefined;
    let view: Store | null = null;
    const readDb = <T>(read: (db: ReturnType<typeof sqlHandle>) => T): T => {
      if (!view) stores.push((view = databaseUrl ? openStore(join(dir, 'view'), { databaseUrl }) : openStore(dataDir)));
      return read(sqlHandle(view));
    };
    const replicaArgs = (id: string) => [...(databaseUrl ? ['--database', databaseUrl] : []), '--broker', broker.url, '--replicas', '--replica-group', 'standby-kill-test', '--replica-id', id, '--leader-poll-ms', '200'];
    const pair: ServerProcess[] = [];
    for (const id of ['rep-a', 'rep-b']) pair.push(await startServerProcess(dataDir, await freePort(), await freePort(), replicaArgs(id)));
    servers.push(...pair);
    const api = createApiClient(pair[0]!.url, ADMIN_TOKEN);
    await loadScenario(api, DEMO_CATALOG_DIR);
    const releaseId = (await createClassRelease(api, CLASS_A)).release.id;

    const ids = Array.from({ length: 8 }, (_, i) => `gh-standby-${String(i + 1).padStart(2, '0')}`);
    for (const id of ids) await api.json('POST', '/api/v1/devices', { id, deviceClassId: CLASS_A.deviceClassId, tags: ['replica-standby-kill-test'] });
    const fleet = await Promise.all(ids.map((id) => connectSimDevice(broker.url, id)));
    devices.push(...fleet);
    await waitFor(() => readDb((db) => db.prepare("SELECT COUNT(*) FROM device_state WHERE online = 1 AND device_id LIKE 'gh-standby-%'").pluck().get() === ids.length), 'every device online in the store', 20_000, 100);

    // Both replicas up: the broker splits the batches between them; each device's ack is read from the store.
    for (const d of fleet) await d.sendEvents(1, PHASE);
    await waitFor(() => fleet.every((d) => d.maxAck() === PHASE), 'every device acked up to 5 with both replicas up', 20_000, 50);

    const leaseHolder = () => readDb((db) => db.prepare("SELECT holder FROM leader_leases WHERE name = 'fleet-engines'").pluck().get()) as string;
    const leader = leaseHolder();
    expect(['rep-a', 'rep-b']).toContain(leader);
    const survivor = pair[leader === 'rep-a' ? 0 : 1]!;
    const victim = pair[leader === 'rep-a' ? 1 : 0]!;

    // A rollout in three waves (2, 3, 3) led by the survivor; the first wave is sent but not yet applied.
    const created = await api.json<{ id: string }>('POST', '/api/v1/rollouts', { releaseId, target: { deviceIds: ids }, waves: [2, 3], gate: { telemetryFrames: 0 } });
    await waitFor(() => fleet.filter((d) => d.releases.includes(releaseId)).length === 2, 'the first wave sent', 20_000, 50);

    // The standby freezes: its broker connection stays open, so the broker keeps handing it its share of the
    // batches, which it neither stores nor acknowledges. Each publish below resolves on the broker's PUBACK,
    // so every batch has been routed to one of the two replicas before the kill.
    victim.child.kill('SIGSTOP');
    for (const d of fleet) await d.sendEvents(PHASE + 1, PHASE);
    // A state change of every device in the same moment (its last seq): some reach only the frozen replica.
    for (const d of fleet) await d.client.publishAsync(deviceTopic(d.id, 'state'), JSON.stringify(stateOf(true, null, 2 * PHASE)), { qos: 1, retain: true });
    await victim.kill();
    expect(victim.child.signalCode).toBe('SIGKILL');

    // What the devices do, as the agent's outbox does: resend from the first unacked seq until acked, then go on.
    const unackedAtKill = fleet.filter((d) => d.maxAck() < 2 * PHASE).map((d) => d.id);
    await waitFor(async () => {
      for (const d of fleet) if (d.maxAck() < 2 * PHASE) await d.sendEvents(d.maxAck() + 1, 2 * PHASE - d.maxAck());
      return fleet.every((d) => d.maxAck() === 2 * PHASE);
    }, 'every device acked up to 10 by the survivor after resending', 20_000, 300);
    for (const d of fleet) await d.sendEvents(2 * PHASE + 1, PHASE);
    await waitFor(() => fleet.every((d) => d.maxAck() === TOTAL), 'every device acked up to 15 by the survivor', 20_000, 50);
    console.info(`replica standby kill (${backend}): ${unackedAtKill.length} of ${ids.length} devices had batch 6–10 unacked when the standby died and resent it`);

    // The stored state of every device is its latest, also where that state message was lost with the standby.
    const storedLastSeq = () => readDb((db) => db.prepare("SELECT device_id AS id, state FROM device_state WHERE device_id LIKE 'gh-standby-%' ORDER BY device_id").all()) as Array<{ id: string; state: string | null }>;
    await waitFor(() => storedLastSeq().every((r) => r.state !== null && (JSON.parse(r.state) as { lastSeq: number }).lastSeq === 2 * PHASE), 'every device\'s latest state stored', 15_000, 100)
      .catch(() => undefined);
    expect(survivor.output.some((l) => l.includes(`replica ${victim === pair[0] ? 'rep-a' : 'rep-b'} lost its broker connection`))).toBe(true);
    expect(storedLastSeq().map((r) => ({ id: r.id, lastSeq: r.state === null ? null : (JSON.parse(r.state) as { lastSeq: number }).lastSeq }))).toEqual(ids.map((id) => ({ id, lastSeq: 2 * PHASE })));

    // Every event each device considers acknowledged is stored, once.
    const rows = readDb((db) => db.prepare("SELECT device_id AS id, COUNT(*) AS n, COUNT(DISTINCT seq) AS k, MIN(seq) AS lo, MAX(seq) AS hi FROM device_events WHERE device_id LIKE 'gh-standby-%' GROUP BY device_id ORDER BY device_id").all()) as Array<{ id: string; n: number; k: number; lo: number; hi: number }>;
    expect(rows.map((r) => ({ id: r.id, n: Number(r.n), k: Number(r.k), lo: Number(r.lo), hi: Number(r.hi) }))).toEqual(ids.map((id) => ({ id, n: TOTAL, k: TOTAL, lo: 1, hi: TOTAL })));

    // Device state keeps updating and the rollout engine on the survivor goes on.
    for (const d of fleet) await d.applyReleases();
    const survivorApi = createApiClient(survivor.url, ADMIN_TOKEN);
    await waitFor(async () => (await survivorApi.json<{ status: string }>('GET', `/api/v1/rollouts/${created.id}`)).status === 'completed', 'the rollout completed on the survivor', 30_000, 100);
    const running = readDb((db) => db.prepare("SELECT device_id FROM device_state WHERE online = 1 AND release_id = ? AND device_id LIKE 'gh-standby-%' ORDER BY device_id").pluck().all(releaseId));
    expect(running).toEqual(ids);
    const perDevice = readDb((db) => db.prepare('SELECT device_id AS id, COUNT(*) AS n FROM assignments WHERE cause = ? GROUP BY device_id ORDER BY device_id').all(`rollout:${created.id}`)) as Array<{ id: string; n: number }>;
    expect(perDevice.map((r) => ({ id: r.id, n: Number(r.n) }))).toEqual(ids.map((id) => ({ id, n: 1 })));
    expect(leaseHolder()).toBe(leader);
  }, 120_000);
});
}
