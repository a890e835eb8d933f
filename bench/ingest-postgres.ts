// Ingest bench on PostgreSQL: the fleet of bench/ingest.ts (40 agents draining 7,500 events each through the
// embedded broker) into one server whose store is a PostgreSQL database, against a bare batched insert of
// the same rows into the same PostgreSQL server in the same run. Targets: ratio ≥ 0.5, lost = 0.
// ingest-postgres-2-replicas: the same fleet through a private Mosquitto (MQTT 5) into two replicas sharing the
// device messages (shared subscription) and the PostgreSQL database, against the same bare insert, same run.
import { mkdtempSync, rmSync } from 'node:fs';
import { cpus, tmpdir, totalmem } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { openStore } from '../src/store/index.js';
import type { NewDeviceEvent } from '../src/store/device-events.js';
import type { BenchFigure } from './figure.js';
import { median } from './figure.js';
import { BARE_BATCH, measureIngest } from './ingest.js';
import { createBenchDatabase } from './postgres-database.js';
import { mosquittoInstalled, startBenchMosquitto } from './private-mosquitto.js';

const BARE_RUNS = 3;

/**
 * Bare `pg`: an async client of its own, the statement the event writer uses (one multi-row INSERT … SELECT
 * FROM unnest … ON CONFLICT DO NOTHING per device batch), BARE_BATCH rows of one device per transaction,
 * devices taking turns as the agents' batches do, into a freshly migrated database. Median of BARE_RUNS.
 */
async function bareInsertRate(rowsByDevice: Map<string, NewDeviceEvent[]>): Promise<number> {
  const database = createBenchDatabase('bare');
  const dataDir = mkdtempSync(join(tmpdir(), 'ocellus-bench-bare-pg-'));
  try {
    openStore(dataDir, { databaseUrl: database.url }).close();
    const client = new pg.Client({ connectionString: database.url });
    await client.connect();
    try {
      const rates: number[] = [];
      for (let run = 0; run < BARE_RUNS; run++) {
        await client.query('TRUNCATE device_events');
        const at = new Date().toISOString();
        let total = 0;
        const t0 = performance.now();
        for (let offset = 0, any = true; any; offset += BARE_BATCH) {
          any = false;
          for (const [deviceId, rows] of rowsByDevice) {
            if (offset >= rows.length) continue;
            any = true;
            const batch = rows.slice(offset, offset + BARE_BATCH);
            await client.query('BEGIN');
            const r = await client.query({
              name: 'bare-insert',
              text: `INSERT INTO device_events (device_id, seq, ts, type, event, received_at)
                SELECT $1, s, t, y, e, $2 FROM unnest($3::bigint[], $4::text[], $5::text[], $6::text[]) AS u (s, t, y, e) ON CONFLICT DO NOTHING`,
              values: [deviceId, at, batch.map((e) => e.seq), batch.map((e) => e.ts), batch.map((e) => e.type), batch.map((e) => e.json)],
            });
            await client.query('COMMIT');
            total += r.rowCount ?? 0;
          }
        }
        rates.push(total / ((performance.now() - t0) / 1000));
      }
      return median(rates);
    } finally {
      await client.end();
    }
  } finally {
    database.drop();
    rmSync(dataDir, { recursive: true, force: true });
  }
}

export async function run(): Promise<BenchFigure[]> {
  const machine = `${cpus().length} cores, ${Math.round(totalmem() / 2 ** 30)} GiB`;
  const figures: BenchFigure[] = [];
  const database = createBenchDatabase('ingest');
  try {
    figures.push(await measureIngest({ name: 'ingest-postgres', databaseUrl: database.url, targetPerS: 0, bareRate: bareInsertRate, extra: { replicas: 1, machine } }));
  } finally {
    database.drop();
  }
  if (!mosquittoInstalled) {
    process.stderr.write('ingest-postgres-2-replicas skipped: the mosquitto program is not installed (replicas need an MQTT 5 broker)\n');
    return figures;
  }
  const replicated = createBenchDatabase('ingest_replicas');
  const broker = await startBenchMosquitto();
  try {
    figures.push(await measureIngest({
      name: 'ingest-postgres-2-replicas',
      databaseUrl: replicated.url,
      targetPerS: 0,
      bareRate: bareInsertRate,
      replicas: { count: 2, brokerUrl: broker.url },
      extra: { replicas: 2, broker: 'Mosquitto (private, MQTT 5 shared subscription)', machine },
    }));
  } finally {
    await broker.stop();
    replicated.drop();
  }
  return figures;
}
