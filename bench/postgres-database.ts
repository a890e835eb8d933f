// A PostgreSQL database of a bench's own on the machine's server, created for one measurement and dropped after.
import { randomBytes } from 'node:crypto';
import { connect } from 'node:net';
import { openPgSyncConnection } from '../src/store/pg-sync-connection.js';

/** The server benches use: the machine's own PostgreSQL, trust auth, user postgres (override with OCELLUS_BENCH_POSTGRES_URL). */
export const BENCH_POSTGRES_URL = process.env.OCELLUS_BENCH_POSTGRES_URL ?? 'postgres://postgres@127.0.0.1:5432/postgres';

/** True when something answers on the server's port within a second. */
export function postgresReachable(url = BENCH_POSTGRES_URL): Promise<boolean> {
  const u = new URL(url);
  return new Promise((resolve) => {
    const socket = connect({ host: u.hostname, port: Number(u.port || 5432) });
    const done = (up: boolean) => (socket.destroy(), resolve(up));
    socket.setTimeout(1000, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

function admin(url: string, sql: string): void {
  const c = openPgSyncConnection({ url, applicationName: 'ocellus-bench', waitLimitMs: 30_000 });
  try {
    c.exec(sql);
  } finally {
    c.close();
  }
}

/** Creates `ocellus_bench_<random>` (C collation, as the store wants) and returns its URL and how to drop it. */
export function createBenchDatabase(label: string): { url: string; drop(): void } {
  const name = `ocellus_bench_${label.replace(/[^a-z0-9]/g, '_')}_${randomBytes(4).toString('hex')}`;
  admin(BENCH_POSTGRES_URL, `CREATE DATABASE ${name} TEMPLATE template0 LC_COLLATE 'C' LC_CTYPE 'C'`);
  const u = new URL(BENCH_POSTGRES_URL);
  u.pathname = `/${name}`;
  return { url: u.toString(), drop: () => admin(BENCH_POSTGRES_URL, `DROP DATABASE IF EXISTS ${name} WITH (FORCE)`) };
}
