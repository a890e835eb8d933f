// A throwaway PostgreSQL database for a bench part: created with C collation (the store needs it), dropped after.
import { randomBytes } from 'node:crypto';
import { connect } from 'node:net';
import { openPgSyncConnection } from '../src/store/pg-sync-connection.js';

/** The machine's own server, trust auth, user postgres (override with OCELLUS_BENCH_POSTGRES_URL). */
export const benchPostgresUrl = process.env.OCELLUS_BENCH_POSTGRES_URL ?? 'postgres://postgres@127.0.0.1:5432/postgres';

export function databaseUrl(name: string): string {
  const u = new URL(benchPostgresUrl);
  u.pathname = `/${name}`;
  return u.toString();
}

function admin(sql: string): void {
  const c = openPgSyncConnection({ url: benchPostgresUrl, applicationName: 'ocellus-bench' });
  try {
    c.exec(sql);
  } finally {
    c.close();
  }
}

export function createBenchDatabase(label: string): { name: string; url: string; drop(): void } {
  const name = `ocellus_bench_${label}_${randomBytes(4).toString('hex')}`;
  admin(`CREATE DATABASE ${name} TEMPLATE template0 LC_COLLATE 'C' LC_CTYPE 'C'`);
  return { name, url: databaseUrl(name), drop: () => admin(`DROP DATABASE IF EXISTS ${name} WITH (FORCE)`) };
}

/** True when something answers on the bench server's port within a second (a bench part skips PostgreSQL otherwise). */
export function postgresReachable(url = benchPostgresUrl): Promise<boolean> {
  const u = new URL(url);
  return new Promise((resolve) => {
    const socket = connect({ host: u.hostname, port: Number(u.port || 5432) });
    const done = (up: boolean) => (socket.destroy(), resolve(up));
    socket.setTimeout(1000, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}
