// History bench on PostgreSQL: the same synthetic fleet as bench/history.ts (10 million events, 1,000 devices,
// 30 days each; demo data), generated inside PostgreSQL with generate_series (no rows cross the wire), then
// one device-day of history asked of the real HTTP API on a store opened with a postgres:// URL.
// Figure: p95 of the request time, target ≤ 20 ms; the setup time is reported beside it.
import { mkdtempSync, rmSync } from 'node:fs';
import { cpus, tmpdir, totalmem } from 'node:os';
import { join } from 'node:path';
import { openPgSyncConnection } from '../src/store/pg-sync-connection.js';
import { openStore } from '../src/store/index.js';
import type { BenchFigure } from './figure.js';
import { DAYS, DEVICES, EVENTS_PER_DEVICE, measureDeviceDay, START_MS, STEP_MS, TASKS } from './history.js';
import { createBenchDatabase, keptBenchDatabase } from './postgres-database.js';

const CHUNK_DEVICES = 100;

/** One device's task in its k-th block of ten events: a fixed hash of (device, block), so every run is the same. */
function taskSql(block: string): string {
  return `(ARRAY[${TASKS.map((t) => `'${t}'`).join(', ')}])[1 + abs(hashtext(d.id || '/' || (${block})::text)) % ${TASKS.length}]`;
}

/** Empties what a load cut short left in a kept database, so generate() starts from the migrated schema. */
function resetFleet(url: string): void {
  const db = openPgSyncConnection({ url, applicationName: 'ocellus-bench-reset' });
  try {
    db.exec('DROP INDEX IF EXISTS device_events_by_type; CREATE INDEX device_events_by_type ON device_events (type, device_id, seq)');
    db.exec('TRUNCATE device_events, assignments, devices, releases CASCADE');
  } finally {
    db.close();
  }
}

function generate(url: string, log: (line: string) => void): number {
  const t0 = performance.now();
  // Bulk load on a connection of its own: long statements allowed, commits not waited for, the type index built once at the end.
  const db = openPgSyncConnection({ url, statementTimeoutMs: 1_800_000, waitLimitMs: 1_900_000, applicationName: 'ocellus-bench-load' });
  try {
    db.exec("SET synchronous_commit = off; SET maintenance_work_mem = '1GB'");
    const at = new Date(START_MS - 86_400_000).toISOString();
    db.prepare('INSERT INTO releases (id, device_class_id, version, signed, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)')
      .run('bench-rel-1', 'bench-class', 1, '{"demoData":true}', at, 'bench (demo data)');
    db.prepare(`INSERT INTO devices (id, device_class_id, tags, password_hash, assigned_release_id, created_at, created_by)
      SELECT 'bench-dev-' || lpad(g::text, 4, '0'), 'bench-class', '[]', 'x', 'bench-rel-1', ?, 'bench' FROM generate_series(0, ${DEVICES - 1}) g`).run(at);
    db.prepare(`INSERT INTO assignments (device_id, release_id, cause, actor, created_at)
      SELECT id, 'bench-rel-1', 'manual', 'bench operator#1', ? FROM devices ORDER BY id`).run(at);
    db.exec('DROP INDEX device_events_by_type');
    const ts = `to_char(timestamp '${new Date(START_MS).toISOString().slice(0, 19)}' + ((s.seq - 1)::bigint * ${STEP_MS} + abs(hashtext(d.id || ':' || s.seq::text)::bigint) % 1000) * interval '1 millisecond', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"')`;
    const block = '(s.seq - 1) / 10';
    const noise = (salt: string) => `(abs(hashtext(d.id || '${salt}' || s.seq::text)::bigint) % 1000) / 1000.0`;
    const insert = db.prepare(`INSERT INTO device_events (device_id, seq, ts, type, event, received_at)
      SELECT id, seq, ts, type, event, ts FROM (
        SELECT d.id, s.seq, ${ts} AS ts,
          CASE WHEN s.seq % 10 = 1 THEN 'task-switched' ELSE 'telemetry' END AS type,
          CASE WHEN s.seq % 10 = 1
            THEN '{"seq":' || s.seq || ',"ts":"' || ${ts} || '","type":"task-switched","fromTask":'
              || CASE WHEN s.seq = 1 THEN 'null' ELSE '"' || ${taskSql(`${block} - 1`)} || '"' END
              || ',"toTask":"' || ${taskSql(block)} || '","profileId":"' || ${taskSql(block)} || '-p","profileRevision":1,"releaseId":"bench-rel-1","reason":"local","overheadMs":1.2,"actuationMs":40.5}'
            ELSE '{"seq":' || s.seq || ',"ts":"' || ${ts} || '","type":"telemetry","task":"' || ${taskSql(block)} || '","profileId":"' || ${taskSql(block)}
              || '-p","profileRevision":1,"releaseId":"bench-rel-1","frames":' || (2000 + abs(hashtext(d.id || 'f' || s.seq::text)::bigint) % 600)
              || ',"windowS":259.2,"inferenceMsMean":' || round(12 + ${noise('i')}, 3) || ',"inferenceMjMean":' || round(30 + ${noise('e')}, 3)
              || ',"frameEnergyMjMean":' || round(45 + ${noise('g')}, 3) || '}'
          END AS event
        FROM (SELECT 'bench-dev-' || lpad(g::text, 4, '0') AS id FROM generate_series(?::int, ?::int) g) d
        CROSS JOIN generate_series(1, ${EVENTS_PER_DEVICE}) AS s (seq)
        ORDER BY d.id, s.seq) rows`);
    for (let first = 0; first < DEVICES; first += CHUNK_DEVICES) {
      insert.run(first, Math.min(DEVICES, first + CHUNK_DEVICES) - 1);
      log(`history-postgres: ${(first + CHUNK_DEVICES) * EVENTS_PER_DEVICE} events written (${((performance.now() - t0) / 1000).toFixed(0)} s)`);
    }
    db.exec('CREATE INDEX device_events_by_type ON device_events (type, device_id, seq)');
    db.exec('VACUUM ANALYZE device_events');
  } finally {
    db.close();
  }
  const setupS = (performance.now() - t0) / 1000;
  log(`history-postgres: ${DEVICES * EVENTS_PER_DEVICE} events, the type index and VACUUM ANALYZE in ${setupS.toFixed(0)} s`);
  return setupS;
}

/** Whether a kept database already holds the whole synthetic fleet (a load cut short is regenerated). */
function holdsFleet(url: string): boolean {
  const db = openPgSyncConnection({ url, applicationName: 'ocellus-bench-check' });
  try {
    const table = db.prepare("SELECT to_regclass('device_events') AS t").get() as { t: string | null };
    if (table.t === null) return false;
    const n = db.prepare('SELECT count(*)::int AS n FROM device_events').get() as { n: number };
    return n.n === DEVICES * EVENTS_PER_DEVICE;
  } finally {
    db.close();
  }
}

/**
 * OCELLUS_BENCH_KEEP_DB=1 keeps the generated database (ocellus_bench_history_kept) after the run and reuses it
 * on the next one, skipping the ~4 minute load; migrations still run on it at open. Drop it with
 * `psql -h 127.0.0.1 -U postgres -c 'DROP DATABASE ocellus_bench_history_kept'`.
 */
export async function run(): Promise<BenchFigure[]> {
  const log = (line: string) => process.stderr.write(`${line}\n`);
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-bench-history-pg-'));
  const keep = process.env.OCELLUS_BENCH_KEEP_DB === '1';
  const database = keep ? { ...keptBenchDatabase('history'), drop: () => undefined } : createBenchDatabase('history');
  try {
    // Opened once first so the schema is migrated before the bulk load writes into it.
    openStore(dir, { databaseUrl: database.url }).close();
    let setupS = 0;
    if (keep && holdsFleet(database.url)) log('history-postgres: reusing the kept database (OCELLUS_BENCH_KEEP_DB=1)');
    else {
      if (keep) resetFleet(database.url);
      setupS = generate(database.url, log);
    }
    const store = openStore(dir, { databaseUrl: database.url });
    try {
      const figure = await measureDeviceDay(store, dir, 'history-postgres-device-day-p95', log);
      const rows = store.deviceEvents.count();
      return [{ ...figure, events: rows, setupS: Math.round(setupS), days: DAYS, machine: `${cpus().length} cores, ${Math.round(totalmem() / 2 ** 30)} GiB` } as BenchFigure];
    } finally {
      store.close();
    }
  } finally {
    database.drop();
    rmSync(dir, { recursive: true, force: true });
  }
}
