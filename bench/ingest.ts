import { spawn } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createInterface } from 'node:readline';
import { fileURLToPath } from 'node:url';
import { startBus, type Bus } from '../src/bus/start-bus.js';
import type { NewDeviceEvent } from '../src/store/device-events.js';
import { openStore, type Store } from '../src/store/index.js';
import { startServer } from '../src/server/start-server.js';
import { median, type BenchFigure } from './figure.js';
import type { IngestFleetSettings } from './ingest-fleet.js';
import { sqlHandle } from '../src/store/sqlite-handle.js';

const DEVICES = 40;
const EVENTS_PER_DEVICE = 7500;
/** Each agent logs one agent-started event when it starts, besides its backlog. */
const EXPECTED = DEVICES * (EVENTS_PER_DEVICE + 1);
export const TARGET_PER_S = 20_000;
const MIN_RATIO = 0.5;
const DEADLINE_MS = 240_000;
/** The agents' batch size: the bare insert commits as many rows per transaction. */
export const BARE_BATCH = 500;
/** The bare insert is repeated on fresh stores and its median taken: one run swings with the disk cache. */
const BARE_RUNS = 3;
const FLEET_SCRIPT = fileURLToPath(new URL('./ingest-fleet.ts', import.meta.url));

type FleetMessage = { phase: string; [k: string]: unknown };

function startFleet(settingsFile: string) {
  const child = spawn(process.execPath, ['--import', 'tsx', FLEET_SCRIPT, settingsFile], { stdio: ['pipe', 'pipe', 'pipe'] });
  let stderr = '';
  child.stderr.on('data', (c: Buffer) => void (stderr = (stderr + c.toString()).slice(-4000)));
  const messages = createInterface({ input: child.stdout });
  const waiters: Array<{ phase: string; resolve: (m: FleetMessage) => void }> = [];
  const seen: FleetMessage[] = [];
  messages.on('line', (line) => {
    const m = JSON.parse(line) as FleetMessage;
    seen.push(m);
    for (const w of waiters.filter((x) => x.phase === m.phase)) w.resolve(m);
  });
  const exited = new Promise<number>((resolve) => child.once('exit', (code) => resolve(code ?? -1)));
  return {
    child,
    exited,
    stderr: () => stderr,
    phase: (phase: string) =>
      new Promise<FleetMessage>((resolve, reject) => {
        const already = seen.find((m) => m.phase === phase);
        if (already) return resolve(already);
        waiters.push({ phase, resolve });
        void exited.then((code) => reject(new Error(`ingest fleet exited (${code}) before '${phase}': ${stderr}`)));
      }),
  };
}

/**
 * Bare better-sqlite3: the same rows into the same table of a fresh store, through the same prepared
 * statement, BARE_BATCH rows of one device per transaction, devices taking turns as the agents' batches do.
 */
function bareInsertRate(rowsByDevice: Map<string, NewDeviceEvent[]>): number {
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-bench-bare-'));
  const store = openStore(dir);
  try {
    const repo = store.deviceEvents;
    const at = new Date().toISOString();
    let total = 0;
    const t0 = performance.now();
    for (let offset = 0, any = true; any; offset += BARE_BATCH) {
      any = false;
      for (const [deviceId, rows] of rowsByDevice) {
        if (offset >= rows.length) continue;
        any = true;
        const batch = rows.slice(offset, offset + BARE_BATCH);
        total += store.transaction(() => repo.insert(deviceId, batch, at));
      }
    }
    return total / ((performance.now() - t0) / 1000);
  } finally {
    store.close();
    rmSync(dir, { recursive: true, force: true });
  }
}

/**
 * Sustained ingest: DEVICES agents in a child process each drain a backlog of EVENTS_PER_DEVICE telemetry
 * events (kept on disk, as after a network outage) through the embedded broker and the bridge into the
 * store, over loopback. The rate is counted from the first stored event to the last; every event must be
 * stored exactly once. The same rows are then inserted with bare better-sqlite3 for comparison.
 */
export async function run(): Promise<BenchFigure[]> {
  return [await measureIngest({ name: 'ingest', bareRate: async (rows) => median(Array.from({ length: BARE_RUNS }, () => bareInsertRate(rows))) })];
}

export interface IngestBenchOptions {
  name: string;
  /** The store's PostgreSQL URL; the data folder's SQLite file when absent. */
  databaseUrl?: string;
  /** The comparison: events/s of a bare batched insert of the same rows into the same kind of store. */
  bareRate(rowsByDevice: Map<string, NewDeviceEvent[]>): Promise<number>;
  /** Extra fields for the figure (machine size, backend notes). */
  extra?: Record<string, unknown>;
  /** Events/s the ingest must reach (TARGET_PER_S when absent; 0 when only the ratio and losses count). */
  targetPerS?: number;
  /**
   * Several replicas instead of one server: `count` buses in replicas mode, each on its own connection to the same
   * store, sharing the device messages through an MQTT 5 shared subscription on the external broker `brokerUrl`.
   */
  replicas?: { count: number; brokerUrl: string };
}

/** One server (HTTP, embedded broker, bridge, event writer) receiving the fleet's backlog; the figure compares it with options.bareRate. */
export async function measureIngest(options: IngestBenchOptions): Promise<BenchFigure> {
  const root = mkdtempSync(join(tmpdir(), 'ocellus-bench-ingest-'));
  const storeOptions = options.databaseUrl !== undefined ? { databaseUrl: options.databaseUrl } : {};
  const server = await startServer({ dataDir: join(root, 'server'), port: 0, ...storeOptions });
  const replicaStores: Store[] = [];
  const buses: Bus[] = [];
  if (options.replicas) {
    const group = `bench-ingest-${process.pid}`;
    for (let i = 0; i < options.replicas.count; i++) {
      const store = i === 0 ? server.store : openStore(join(root, 'server'), storeOptions);
      if (i > 0) replicaStores.push(store);
      buses.push(await startBus({
        store, ...(i === 0 ? { metrics: server.metrics } : {}),
        external: { url: options.replicas.brokerUrl, username: 'ocellus-server', password: '' },
        replicas: { group, replicaId: `bench-${i + 1}` },
      }));
    }
  } else buses.push(await startBus({ store: server.store, metrics: server.metrics, embedded: { port: 0 } }));
  const bus = buses[0]!;
  /** What every replica's bridge stored, summed. */
  const stored = () => buses.reduce((sum, b) => sum + b.bridge.stats().eventsStored, 0);
  let fleet: ReturnType<typeof startFleet> | null = null;
  try {
    const at = new Date().toISOString();
    const devices = Array.from({ length: DEVICES }, (_, i) => {
      const id = `gh-bench-${String(i + 1).padStart(3, '0')}`;
      const { password } = server.store.devices.enrol({ id, deviceClassId: 'gh-scout-a', tags: ['bench'], actor: 'bench', at })!;
      return { id, password };
    });
    const keyPath = join(root, 'server-public-key.pem');
    const signingKey = (await (await fetch(`${server.url}/api/v1/signing-key`)).json()) as { publicKeyPem: string };
    writeFileSync(keyPath, signingKey.publicKeyPem);
    const settings: IngestFleetSettings = {
      brokerUrl: bus.brokerUrl,
      serverUrl: server.url,
      publicKeyPath: keyPath,
      dataRoot: join(root, 'agents'),
      deviceClassId: 'gh-scout-a',
      eventsPerDevice: EVENTS_PER_DEVICE,
      devices,
    };
    const settingsFile = join(root, 'fleet.json');
    writeFileSync(settingsFile, JSON.stringify(settings));
    fleet = startFleet(settingsFile);
    await fleet.phase('seeded');

    let firstMs: number | null = null;
    let firstCount = 0;
    let lastMs = 0;
    const deadline = performance.now() + DEADLINE_MS;
    fleet.child.stdin.write('go\n');
    for (;;) {
      const storedNow = stored();
      const now = performance.now();
      if (storedNow > 0 && firstMs === null) (firstMs = now), (firstCount = storedNow);
      if (storedNow >= EXPECTED) {
        lastMs = now;
        break;
      }
      if (now > deadline) throw new Error(`ingest: ${storedNow} of ${EXPECTED} events stored after ${DEADLINE_MS / 1000} s`);
      await new Promise((r) => setTimeout(r, 10));
    }
    await fleet.phase('drained');
    const storedRows = sqlHandle(server.store).prepare('SELECT device_id AS "deviceId", seq, ts, type, event AS json FROM device_events ORDER BY device_id, seq').all() as Array<NewDeviceEvent & { deviceId: string }>;
    const rowsByDevice = new Map<string, NewDeviceEvent[]>();
    for (const { deviceId, ...row } of storedRows) {
      const list = rowsByDevice.get(deviceId);
      if (list) list.push(row);
      else rowsByDevice.set(deviceId, [row]);
    }
    const events = server.store.deviceEvents;
    const complete = devices.filter((d) => events.contiguousSeq(d.id) === EVENTS_PER_DEVICE + 1 && events.count(d.id) === EVENTS_PER_DEVICE + 1).length;
    const lost = EXPECTED - storedRows.length;
    const perReplica = buses.map((b) => b.bridge.stats());
    const stats = { eventsStored: stored(), eventsDuplicate: perReplica.reduce((sum, r) => sum + r.eventsDuplicate, 0) };
    const value = Math.round((stats.eventsStored - firstCount) / ((lastMs - firstMs!) / 1000));
    const floor = Math.round(await options.bareRate(rowsByDevice));
    const ratio = Math.round((value / floor) * 1000) / 1000;
    const figure: BenchFigure & Record<'lost' | 'devices' | 'events' | 'duplicates' | 'devicesComplete', number> = {
        name: options.name,
        value,
        unit: 'events/s',
        target: options.targetPerS ?? TARGET_PER_S,
        floor,
        ratio,
        lost,
        devices: DEVICES,
        events: EXPECTED,
        duplicates: stats.eventsDuplicate,
        devicesComplete: complete,
        ...(options.replicas ? { storedPerReplica: perReplica.map((r) => r.eventsStored) } : {}),
        ...options.extra,
        ok: value >= (options.targetPerS ?? TARGET_PER_S) && ratio >= MIN_RATIO && lost === 0 && complete === DEVICES,
    };
    return figure;
  } finally {
    if (fleet && fleet.child.exitCode === null) {
      fleet.child.kill('SIGTERM');
      await fleet.exited;
    }
    for (const b of buses) await b.close();
    for (const s of replicaStores) s.close();
    await server.close();
    rmSync(root, { recursive: true, force: true });
  }
}
