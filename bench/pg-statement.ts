// What the synchronous PostgreSQL connection costs the caller per statement: a one-row primary-key read
// through the store's facade (worker thread + Atomics.wait) vs the same prepared statement on an async `pg`
// client awaited on the same thread, in the same run, against the same server. Figure: the facade's median µs;
// ratio to the bare client's (target ≤ 2: the hop to the worker may at most double a loopback round trip).
import { mkdtempSync, rmSync } from 'node:fs';
import { cpus, tmpdir, totalmem } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { openStore } from '../src/store/index.js';
import { median, type BenchFigure } from './figure.js';
import { createBenchDatabase } from './postgres-database.js';

const ROUNDS = 5;
const PER_ROUND = 2000;

export async function run(): Promise<BenchFigure[]> {
  const database = createBenchDatabase('statement');
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-bench-pgstmt-'));
  const store = openStore(dir, { databaseUrl: database.url });
  const client = new pg.Client({ connectionString: database.url });
  try {
    const at = new Date().toISOString();
    store.devices.enrol({ id: 'gh-bench-01', deviceClassId: 'gh-scout-a', tags: [], actor: 'bench', at });
    await client.connect();
    const facade: number[] = [];
    const bare: number[] = [];
    for (let r = 0; r < ROUNDS; r++) {
      let t = performance.now();
      for (let i = 0; i < PER_ROUND; i++) store.devices.get('gh-bench-01');
      facade.push(((performance.now() - t) * 1000) / PER_ROUND);
      t = performance.now();
      for (let i = 0; i < PER_ROUND; i++) await client.query({ name: 'one-device', text: 'SELECT * FROM devices WHERE id = $1', values: ['gh-bench-01'] });
      bare.push(((performance.now() - t) * 1000) / PER_ROUND);
    }
    const value = Math.round(median(facade));
    const floor = Math.round(median(bare));
    const ratio = Math.round((value / floor) * 1000) / 1000;
    return [{ name: 'pg-statement', value, unit: 'µs', target: 2, floor, ratio, ok: ratio <= 2, machine: `${cpus().length} cores, ${Math.round(totalmem() / 2 ** 30)} GiB` } as BenchFigure];
  } finally {
    await client.end().catch(() => undefined);
    store.close();
    database.drop();
    rmSync(dir, { recursive: true, force: true });
  }
}
