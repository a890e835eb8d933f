// History bench: 10 million stored events over 1,000 devices (30 days each), written straight into SQLite
// in a temporary folder; then one device-day of history is asked of the real HTTP API (in-process) again
// and again. Figure: p95 of the request time, target ≤ 20 ms. The data is synthetic (demo data).
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createApp, createSigner } from '../src/api/index.js';
import { generateSigningKeyPair } from '../src/protocol/signing.js';
import { createBlobStore, loadOrCreateSigningKey, openStore, type Store } from '../src/store/index.js';
import type { BenchFigure } from './figure.js';
import { seededRandom } from '../device-agent/sim-driver.js';
import { sqliteHandle } from '../src/store/sqlite-handle.js';

function percentile(sorted: number[], p: number): number {
  return sorted[Math.min(sorted.length - 1, Math.ceil((p / 100) * sorted.length) - 1)]!;
}

export const DEVICES = 1000;
export const EVENTS_PER_DEVICE = 10_000;
export const DAYS = 30;
const QUERIES = 300;
const WARMUP = 30;
export const START_MS = Date.parse('2025-03-01T00:00:00.000Z');
export const STEP_MS = (DAYS * 86_400_000) / EVENTS_PER_DEVICE;
export const TASKS = ['rows', 'leaves', 'fruit', 'dock'];

/** Writes the synthetic fleet: devices, one release, one assignment each, and EVENTS_PER_DEVICE events each. */
export function generate(dir: string, log: (line: string) => void): void {
  const store = openStore(dir);
  const db = sqliteHandle(store);
  const at = new Date(START_MS - 86_400_000).toISOString();
  db.prepare('INSERT INTO releases (id, device_class_id, version, signed, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)').run(
    'bench-rel-1', 'bench-class', 1, '{"demoData":true}', at, 'bench (demo data)',
  );
  const device = db.prepare(`INSERT INTO devices (id, device_class_id, tags, password_hash, assigned_release_id, created_at, created_by)
    VALUES (?, 'bench-class', '[]', 'x', 'bench-rel-1', ?, 'bench')`);
  const assignment = db.prepare("INSERT INTO assignments (device_id, release_id, cause, actor, created_at) VALUES (?, 'bench-rel-1', 'manual', 'bench operator#1', ?)");
  // Bulk load: no journal, no syncing, the type index built once at the end (the schema ends up as migrated).
  db.pragma('journal_mode = OFF');
  db.pragma('synchronous = OFF');
  db.pragma('cache_size = -262144');
  db.exec('DROP INDEX device_events_by_type');
  const insert = db.prepare('INSERT INTO device_events (device_id, seq, ts, type, event, received_at) VALUES (?, ?, ?, ?, ?, ?)');
  const random = seededRandom(20250301);
  const t0 = performance.now();
  for (let d = 0; d < DEVICES; d++) {
    const id = `bench-dev-${String(d).padStart(4, '0')}`;
    db.transaction(() => {
      device.run(id, at);
      assignment.run(id, at);
      let task = TASKS[d % TASKS.length]!;
      for (let seq = 1; seq <= EVENTS_PER_DEVICE; seq++) {
        const ts = new Date(START_MS + (seq - 1) * STEP_MS + Math.floor(random() * 1000)).toISOString();
        if (seq % 10 === 1) {
          const next = TASKS[Math.floor(random() * TASKS.length)]!;
          const json = `{"seq":${seq},"ts":"${ts}","type":"task-switched","fromTask":${seq === 1 ? 'null' : `"${task}"`},"toTask":"${next}","profileId":"${next}-p","profileRevision":1,"releaseId":"bench-rel-1","reason":"local","overheadMs":1.2,"actuationMs":40.5}`;
          insert.run(id, seq, ts, 'task-switched', json, ts);
          task = next;
        } else {
          const frames = 2000 + Math.floor(random() * 600);
          const json = `{"seq":${seq},"ts":"${ts}","type":"telemetry","task":"${task}","profileId":"${task}-p","profileRevision":1,"releaseId":"bench-rel-1","frames":${frames},"windowS":259.2,"inferenceMsMean":${(12 + random()).toFixed(3)},"inferenceMjMean":${(30 + random()).toFixed(3)},"frameEnergyMjMean":${(45 + random()).toFixed(3)}}`;
          insert.run(id, seq, ts, 'telemetry', json, ts);
        }
      }
    })();
    if ((d + 1) % 100 === 0) log(`history bench: ${(d + 1) * EVENTS_PER_DEVICE} events written (${((performance.now() - t0) / 1000).toFixed(0)} s)`);
  }
  db.exec('CREATE INDEX device_events_by_type ON device_events (type, device_id, seq)');
  db.exec('ANALYZE');
  log(`history bench: ${DEVICES * EVENTS_PER_DEVICE} events and the type index in ${((performance.now() - t0) / 1000).toFixed(0)} s`);
  store.close();
}

/** Asks one device-day of history of the real HTTP API (in-process) again and again; returns the p95 figure. */
export async function measureDeviceDay(store: Store, dir: string, name: string, log: (line: string) => void): Promise<BenchFigure> {
  const secret = store.tokens.create({ role: 'viewer', label: 'bench viewer', actor: 'bench', at: new Date().toISOString() }).secret;
  const app = createApp({ store, blobs: createBlobStore(dir), signer: createSigner(loadOrCreateSigningKey(dir, generateSigningKeyPair)) });
  const random = seededRandom(7);
  const times: number[] = [];
  let intervals = 0;
  for (let i = 0; i < WARMUP + QUERIES; i++) {
    const id = `bench-dev-${String(Math.floor(random() * DEVICES)).padStart(4, '0')}`;
    const dayMs = START_MS + Math.floor(random() * DAYS) * 86_400_000;
    const from = new Date(dayMs).toISOString();
    const to = new Date(dayMs + 86_400_000).toISOString();
    const t = performance.now();
    const res = await app.request(`/api/v1/devices/${id}/history?from=${from}&to=${to}`, { headers: { authorization: `Bearer ${secret}` } });
    const body = (await res.json()) as { intervals: unknown[] };
    const ms = performance.now() - t;
    if (res.status !== 200) throw new Error(`history request failed: ${res.status}`);
    if (i >= WARMUP) {
      times.push(ms);
      intervals += body.intervals.length;
    }
  }
  times.sort((a, b) => a - b);
  const p95 = percentile(times, 95);
  log(`${name}: ${QUERIES} device-day requests, median ${percentile(times, 50).toFixed(2)} ms, p95 ${p95.toFixed(2)} ms, ${(intervals / QUERIES).toFixed(1)} intervals each`);
  return { name, value: Math.round(p95 * 100) / 100, unit: 'ms', target: 20, ratio: Math.round((p95 / 20) * 1000) / 1000, ok: p95 <= 20 };
}

export async function run(): Promise<BenchFigure[]> {
  const log = (line: string) => process.stderr.write(`${line}\n`);
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-bench-history-'));
  try {
    generate(dir, log);
    const store = openStore(dir);
    try {
      return [await measureDeviceDay(store, dir, 'history-device-day-p95', log)];
    } finally {
      store.close();
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
