// Rollout bench: a release rolled out to N devices hosted by a SEPARATE process (N lightweight agents, each on
// its own MQTT connection to the embedded broker), from the rollout's creation until every device reported it
// applied and the rollout completed; against the floor measured in the same run through the same broker and
// the same connections: the server publishes one command to each device and waits for each device's reply.
// Figures rollout-N: value = rollout time, floor = bare publish-and-reply time, ratio = value ÷ floor (≤ 2.0),
// each the median of three: three floor rounds first, then three rollouts of successive releases.
// The rollout is one wave with the telemetry check off (the light agents send no telemetry): it measures the
// engine's assignment, the bus and the gate, not the waiting a staged rollout does on purpose. Demo data.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import mqtt, { type MqttClient } from 'mqtt';
import { createBridge } from '../src/bus/bridge.js';
import { startEmbeddedBroker } from '../src/bus/broker.js';
import { createCalibrationEngine } from '../src/fleet/calibration/engine.js';
import { createRolloutEngine } from '../src/fleet/rollout/engine.js';
import { createRolloutService } from '../src/fleet/rollout/service.js';
import { rolloutRequestSchema } from '../src/fleet/rollout/spec.js';
import { PROTOCOL_VERSION, RELEASE_FORMAT, allDevicesFilter, deviceTopic, generateSigningKeyPair, parseDeviceTopic, signRelease, type Release } from '../src/protocol/index.js';
import { hashDeviceSecret, openStore, type Store } from '../src/store/index.js';
import { loadOrCreateDeviceSecretKey } from '../src/store/device-secret-key.js';
import { benchDeviceClass, benchTask } from './agent-fixture.js';
import { median, type BenchFigure } from './figure.js';
import type { RolloutFleetSettings } from './rollout-fleet.js';
import { sqlHandle } from '../src/store/sqlite-handle.js';
import { benchPostgresUrl, createBenchDatabase, postgresReachable } from './postgres-database.js';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const SIZES = [1000, 5000];
const POSTGRES_SIZE = 1000;
/** Floor rounds and rollouts per size; each figure is the median. */
const ROUNDS = 3;
const PASSWORD = 'bench-device-password-demo-data';
const SERVER_USER = { username: 'bench-server', password: 'bench-server-secret' };
const log = (line: string) => process.stderr.write(`rollout bench: ${line}\n`);

function waitForLine(child: ChildProcess, pattern: RegExp): Promise<void> {
  return new Promise((resolve, reject) => {
    let seen = '';
    child.stdout!.on('data', (c: Buffer) => {
      seen += c.toString('utf8');
      if (pattern.test(seen)) resolve();
    });
    child.once('exit', (code) => reject(new Error(`fleet process exited (${code}) before ${pattern}`)));
  });
}

async function until(check: () => boolean, what: string, timeoutMs: number, everyMs = 5): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!check()) {
    if (Date.now() > deadline) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, everyMs));
  }
}

/** Devices written straight into the store's database sharing one password's keyed hash, as enrolment stores it. */
function seedDevices(store: Store, ids: string[]): void {
  const hash = hashDeviceSecret(PASSWORD, loadOrCreateDeviceSecretKey(store.dataDir));
  const at = new Date().toISOString();
  const insert = sqlHandle(store).prepare(`INSERT INTO devices (id, device_class_id, tags, password_hash, assigned_release_id, created_at, created_by)
    VALUES (?, ?, '["bench"]', ?, NULL, ?, 'bench (demo data)')`);
  store.transaction(() => ids.forEach((id) => insert.run(id, benchDeviceClass.id, hash, at)));
}

/** CPU time in ms of this process (broker, bridge, engine) and of the fleet process; "?" where /proc is missing. */
type CpuUse = { server: string; fleet: string };

/** CPU time used since the call by this process and by the fleet process (from /proc where there is one). */
function cpuMeter(childPid: number | undefined): () => CpuUse {
  const ticksMs = 10; // USER_HZ is 100 on Linux (sysconf(_SC_CLK_TCK)): one tick of utime/stime is 10 ms
  const childMs = () => {
    try {
      const fields = readFileSync(`/proc/${childPid}/stat`, 'utf8').split(') ')[1]!.split(' ');
      return (Number(fields[11]) + Number(fields[12])) * ticksMs;
    } catch {
      return Number.NaN;
    }
  };
  const server0 = process.cpuUsage();
  const fleet0 = childMs();
  return () => {
    const used = process.cpuUsage(server0);
    const fleet = childMs() - fleet0;
    return { server: ((used.user + used.system) / 1000).toFixed(0), fleet: Number.isNaN(fleet) ? '?' : fleet.toFixed(0) };
  };
}

/** Where the rollout's time went, from stored times alone (ms after creation): read after the run, so it costs the run nothing. */
function phases(store: Store, rolloutId: string, releaseId: string, createdMs: number): string {
  const q = (sql: string, ...args: unknown[]) => sqlHandle(store).prepare(sql).pluck().get(...args) as string | null;
  const after = (iso: string | null) => (iso === null ? '?' : String(Date.parse(iso) - Math.round(createdMs)));
  const firstAssigned = q('SELECT MIN(assigned_at) FROM rollout_devices WHERE rollout_id = ?', rolloutId);
  const firstState = q('SELECT MIN(updated_at) FROM device_state WHERE release_id = ?', releaseId);
  const lastState = q('SELECT MAX(updated_at) FROM device_state WHERE release_id = ?', releaseId);
  const lastPassed = q("SELECT MAX(applied_at) FROM rollout_devices WHERE rollout_id = ?", rolloutId);
  const completed = q('SELECT updated_at FROM rollouts WHERE id = ?', rolloutId);
  return `first pass at +${after(firstAssigned)} ms, states with the release stored from +${after(firstState)} to +${after(lastState)} ms, ` +
    `last device applied at +${after(lastPassed)} ms, completed at +${after(completed)} ms`;
}

/**
 * The floor: the server's account publishes a command to each device (QoS 1) and waits for each device's reply
 * (its retained state, QoS 1), through the same broker and connections the rollout uses. ROUNDS rounds after
 * one subscription; the retained states that arrive on subscribing are drained first and not timed.
 */
async function floorRounds(client: MqttClient, ids: string[], childPid: number | undefined): Promise<Array<{ ms: number; cpu: CpuUse }>> {
  let replied = new Set<string>();
  const onMessage = (topic: string, _payload: Buffer, packet: { retain?: boolean }) => {
    if (packet.retain) return;
    const where = parseDeviceTopic(topic);
    if (where) replied.add(where.deviceId);
  };
  client.on('message', onMessage);
  await client.subscribeAsync(allDevicesFilter('state'), { qos: 1 });
  await new Promise((r) => setTimeout(r, 500));
  const rounds: Array<{ ms: number; cpu: CpuUse }> = [];
  for (let round = 0; round < ROUNDS; round++) {
    replied = new Set();
    const cpu = cpuMeter(childPid);
    const t0 = performance.now();
    const command = (i: number) => JSON.stringify({ v: PROTOCOL_VERSION, id: `bench-${round}-${i}`, issuedBy: 'bench', command: { type: 'report-state' } });
    for (let i = 0; i < ids.length; i += 500) {
      await Promise.all(ids.slice(i, i + 500).map((id, j) => client.publishAsync(deviceTopic(id, 'cmd'), command(i + j), { qos: 1 })));
    }
    await until(() => replied.size === ids.length, 'every reply', 120_000, 1);
    rounds.push({ ms: performance.now() - t0, cpu: cpu() });
  }
  client.off('message', onMessage);
  await client.unsubscribeAsync(allDevicesFilter('state'));
  return rounds;
}

/** Stores release `round` (version round + 1) of the bench's device class, signed. */
function storeRelease(store: Store, n: number, round: number, keys: { privateKeyPem: string; publicKeyPem: string }): Release {
  const files = new Map<string, Buffer>();
  const release: Release = {
    format: RELEASE_FORMAT, id: `bench-rel-${n}-${round + 1}`, version: round + 1, deviceClassId: benchDeviceClass.id, deviceClass: benchDeviceClass,
    createdAt: new Date().toISOString(), createdBy: 'bench (demo data)', audience: { deviceClassId: benchDeviceClass.id }, expiresAt: '2099-01-01T00:00:00.000Z', applyPolicy: 'immediate', defaultTask: 'rows',
    tasks: { rows: benchTask('rows-net', files, 0.5, 4), leaves: benchTask('leaf-net', files, 0.25, 2.8) },
  };
  const signed = signRelease(release, keys.privateKeyPem, keys.publicKeyPem);
  store.releases.insert({ id: release.id, deviceClassId: release.deviceClassId, version: release.version, createdAt: release.createdAt, createdBy: release.createdBy, signed });
  return release;
}

/** One size on one store backend: SQLite (the default) or a fresh PostgreSQL database of the bench's own. */
export async function measure(n: number, backend: 'sqlite' | 'postgres' = 'sqlite'): Promise<BenchFigure> {
  const work = mkdtempSync(join(tmpdir(), 'ocellus-bench-rollout-'));
  const database = backend === 'postgres' ? createBenchDatabase(`rollout_${n}`) : null;
  const store = openStore(join(work, 'server'), database ? { databaseUrl: database.url } : {});
  const ids = Array.from({ length: n }, (_, i) => `bench-dev-${String(i).padStart(5, '0')}`);
  seedDevices(store, ids);
  const keys = generateSigningKeyPair();
  const releases = Array.from({ length: ROUNDS }, (_, round) => storeRelease(store, n, round, keys));
  const broker = await startEmbeddedBroker({ port: 0, serverUser: SERVER_USER, authenticate: (id, password) => store.devices.checkLogin(id, password) });
  const settingsPath = join(work, 'fleet.json');
  const settings: RolloutFleetSettings = {
    brokerUrl: broker.url, publicKeyPem: keys.publicKeyPem, deviceClassId: benchDeviceClass.id, password: PASSWORD, deviceIds: ids, connectConcurrency: 100,
  };
  writeFileSync(settingsPath, JSON.stringify(settings));
  const child = spawn(process.execPath, ['--import', 'tsx', join(ROOT, 'bench/rollout-fleet.ts'), settingsPath], { cwd: ROOT, stdio: ['pipe', 'pipe', 'inherit'] });
  const raw = await mqtt.connectAsync(broker.url, { ...SERVER_USER, clientId: 'bench-raw', reconnectPeriod: 0 });
  const server = await mqtt.connectAsync(broker.url, { ...SERVER_USER, clientId: 'bench-server', reconnectPeriod: 0 });
  try {
    const t0 = performance.now();
    await waitForLine(child, /"phase":"connected"/);
    log(`${n} agents connected in ${((performance.now() - t0) / 1000).toFixed(1)} s`);
    // Every floor round comes before the bridge subscribes, so no floor reply is also stored by it.
    const floors = await floorRounds(raw, ids, child.pid);
    for (const f of floors) log(`${n}: bare publish-and-reply ${f.ms.toFixed(0)} ms (CPU server ${f.cpu.server} / fleet ${f.cpu.fleet} ms)`);

    const bridge = createBridge({ mqttClient: server, store, clock: { now: () => new Date() } });
    await until(() => bridge.deviceStates.countOnline() === n, 'every device online in the store', 120_000, 20);
    const engine = createRolloutEngine({
      store, publisher: bridge, clock: { now: () => new Date() }, onDevicesStored: (listener) => bridge.onStored(listener),
      calibration: createCalibrationEngine({ store, clock: { now: () => new Date() } }),
      tickMs: 20,
    });
    const service = createRolloutService(store);
    await engine.tick();
    engine.start();
    const statusOf = sqlHandle(store).prepare('SELECT status FROM rollouts WHERE id = ?').pluck();
    const values: number[] = [];
    for (const release of releases) {
      const request = rolloutRequestSchema.parse({
        releaseId: release.id,
        target: { deviceClassId: benchDeviceClass.id, tags: ['bench'] },
        waves: ['100%'],
        gate: { telemetryFrames: 0, applyTimeoutS: 600 },
        offline: { waitS: 600, then: 'fail' },
      });
      const cpu = cpuMeter(child.pid);
      const t1 = performance.now();
      // As through the API: the running engine picks the rollout up on its next tick.
      const created = service.create(request, 'bench operator', new Date().toISOString());
      if (!created.ok) throw new Error(`rollout refused: ${created.message}`);
      await until(() => {
        const status = statusOf.get(created.value.id);
        if (status === 'paused') throw new Error(`rollout paused: ${JSON.stringify(service.view(created.value.id)!.pauseReason)}`);
        return status === 'completed';
      }, 'rollout completed', 600_000, 10);
      const value = performance.now() - t1;
      const used = cpu();
      const running = sqlHandle(store).prepare('SELECT COUNT(*) FROM device_state WHERE release_id = ?').pluck().get(release.id) as number;
      if (running !== n) throw new Error(`${running} of ${n} devices report release ${release.id}`);
      values.push(value);
      log(`${n}: rollout of ${release.id} to completion ${value.toFixed(0)} ms (CPU server ${used.server} / fleet ${used.fleet} ms; ${running} devices report it)`);
      log(`${n}:   ${phases(store, created.value.id, release.id, Date.now() - value)}`);
    }
    await engine.stop();
    await bridge.close();
    const value = median(values);
    const floor = median(floors.map((f) => f.ms));
    const ratio = value / floor;
    return { name: `rollout-${backend === 'postgres' ? 'postgres-' : ''}${n}`, value: Math.round(value), unit: 'ms', target: Math.round(2 * floor), floor: Math.round(floor), ratio: Math.round(ratio * 100) / 100, ok: ratio <= 2 };
  } finally {
    child.stdin!.end();
    await new Promise((r) => (child.exitCode !== null ? r(null) : child.once('exit', r)));
    await raw.endAsync(true);
    await server.endAsync(true);
    await broker.close();
    store.close();
    database?.drop();
    rmSync(work, { recursive: true, force: true });
  }
}

export async function run(): Promise<BenchFigure[]> {
  const figures: BenchFigure[] = [];
  for (const n of SIZES) figures.push(await measure(n));
  // The same rollout with the store on PostgreSQL (the replicas' store); the floor is the same bus, measured in the same run.
  if (await postgresReachable()) figures.push(await measure(POSTGRES_SIZE, 'postgres'));
  else log(`rollout-postgres-${POSTGRES_SIZE} skipped: no PostgreSQL answers on ${new URL(benchPostgresUrl).host}`);
  return figures;
}
