import { MessageChannel, receiveMessageOnPort, Worker, type MessagePort } from 'node:worker_threads';
import { numberParameters, orderValues, type NumberedStatement } from './pg-placeholders.js';
import type { SqlConnection, SqlStatement } from './sql-connection.js';

export interface PgSyncOptions {
  /** postgres://user@host:port/database (any libpq-style URL the `pg` driver reads). */
  url: string;
  /** Longest a statement may run before PostgreSQL cancels it (statement_timeout). */
  statementTimeoutMs?: number;
  /** Longest the caller blocks for one answer; past it the connection is closed and the call throws. */
  waitLimitMs?: number;
  /** Name shown in pg_stat_activity. */
  applicationName?: string;
}

interface Reply {
  id: number;
  ok: boolean;
  rows?: unknown[];
  rowCount?: number;
  error?: { message: string; code: string | null; detail: string | null; hint: string | null; constraint: string | null };
}

/** A PostgreSQL error as the store's callers see it: the server's message, its SQLSTATE code and the statement. */
export class PgStatementError extends Error {
  readonly code: string | null;
  readonly detail: string | null;
  constructor(message: string, code: string | null, detail: string | null) {
    super(message);
    this.name = 'PgStatementError';
    this.code = code;
    this.detail = detail;
  }
}

/** The URL with any password removed, for messages and `Store.location`. */
export function redactUrl(url: string): string {
  try {
    const u = new URL(url);
    if (u.password) u.password = '***';
    return u.toString();
  } catch {
    return 'postgres://(unreadable URL)';
  }
}

/**
 * A synchronous connection to PostgreSQL, so the store keeps one synchronous interface on both backends.
 * One worker thread owns one pg client; each statement is posted to it and the calling thread blocks in
 * Atomics.wait until the answer is posted back, then reads it with receiveMessageOnPort (the pattern of the
 * synckit package). Every statement therefore costs the caller one loopback round trip with its event loop
 * stopped; transactions and savepoints run on that one connection exactly as they do on SQLite.
 */
export function openPgSyncConnection(options: PgSyncOptions): SqlConnection {
  const waitLimitMs = options.waitLimitMs ?? 60_000;
  const statementTimeoutMs = options.statementTimeoutMs ?? 30_000;
  const signal = new SharedArrayBuffer(4);
  const flag = new Int32Array(signal);
  const { port1, port2 } = new MessageChannel();
  const connection = {
    connectionString: options.url,
    application_name: options.applicationName ?? 'ocellus',
    statement_timeout: statementTimeoutMs,
    connectionTimeoutMillis: Math.min(10_000, waitLimitMs),
  };
  // execArgv [] keeps tsx out of the worker: it is plain JavaScript and starts in a few milliseconds.
  const worker = new Worker(new URL('./pg-statement-worker.mjs', import.meta.url), {
    workerData: { port: port2, signal, connection },
    transferList: [port2],
    execArgv: [],
  });
  worker.unref();
  port1.unref();
  let open = true;
  let depth = 0;
  let nextId = 1;
  let nextName = 1;
  const location = redactUrl(options.url);

  function shut(): void {
    open = false;
    port1.close();
    void worker.terminate();
  }

  function call(request: Record<string, unknown>, sql: string): Reply {
    if (!open) throw new Error(`the PostgreSQL connection to ${location} is closed`);
    const id = nextId++;
    Atomics.store(flag, 0, 0);
    port1.postMessage({ ...request, id });
    const deadline = Date.now() + waitLimitMs;
    for (;;) {
      const left = deadline - Date.now();
      if (left <= 0) {
        shut();
        throw new Error(`PostgreSQL at ${location} did not answer within ${waitLimitMs} ms; the connection is closed. Statement: ${sql.trim().slice(0, 160)}`);
      }
      Atomics.wait(flag, 0, 0, left);
      const got = receiveMessageOnPort(port1 as MessagePort) as { message: Reply } | undefined;
      if (got && got.message.id === id) return got.message;
      // Woken before the answer is readable (or by a stale one): wait again, briefly.
      if (Atomics.load(flag, 0) === 1 && !got) Atomics.wait(flag, 0, 1, 1);
    }
  }

  function query(request: Record<string, unknown>, sql: string): Reply {
    const reply = call(request, sql);
    if (!reply.ok) {
      const e = reply.error!;
      throw new PgStatementError(`${e.message}${e.detail ? ` (${e.detail})` : ''} [PostgreSQL ${e.code ?? 'error'}] in: ${sql.trim().slice(0, 200)}`, e.code, e.detail);
    }
    return reply;
  }

  function statement(sql: string, numbered: NumberedStatement, name: string, pluck: boolean): SqlStatement {
    const send = (params: unknown[]) => query({ op: 'query', text: numbered.text, name, values: orderValues(numbered, params, sql), pluck }, sql);
    const column = (row: unknown) => (row as unknown[])[0];
    return {
      get: (...params) => {
        const rows = send(params).rows!;
        return rows.length === 0 ? undefined : pluck ? column(rows[0]) : rows[0];
      },
      all: (...params) => {
        const rows = send(params).rows!;
        return pluck ? rows.map(column) : rows;
      },
      run: (...params) => ({ changes: send(params).rowCount ?? 0 }),
      pluck: () => statement(sql, numbered, name, true),
    };
  }

  function simple(sql: string): void {
    query({ op: 'exec', text: sql }, sql);
  }

  // The first statement waits for the connection itself: a refused one fails openStore here, plainly.
  simple('SELECT 1');

  const conn: SqlConnection = {
    dialect: 'postgres',
    location,
    prepare: function prepare(sql) {
      // A server-side prepared statement per text: parsed and planned once per connection.
      return statement(sql, numberParameters(sql), `ocellus_${nextName++}`, false);
    },
    exec: simple,
    transaction: function transaction<T>(fn: () => T): T {
      if (depth > 0) {
        // Nested, as in better-sqlite3: a savepoint, undone alone when fn throws.
        const sp = `ocellus_nested_${depth}`;
        simple(`SAVEPOINT ${sp}`);
        depth += 1;
        try {
          const value = fn();
          simple(`RELEASE SAVEPOINT ${sp}`);
          return value;
        } catch (e) {
          simple(`ROLLBACK TO SAVEPOINT ${sp}`);
          simple(`RELEASE SAVEPOINT ${sp}`);
          throw e;
        } finally {
          depth -= 1;
        }
      }
      simple('BEGIN');
      depth = 1;
      try {
        const value = fn();
        if (value instanceof Promise) throw new TypeError('a store transaction cannot be an async function (it would commit before the awaits)');
        simple('COMMIT');
        return value;
      } catch (e) {
        if (open) simple('ROLLBACK');
        throw e;
      } finally {
        depth = 0;
      }
    },
    get inTransaction() {
      return depth > 0;
    },
    isOpen: function isOpen() {
      return open;
    },
    close: function close() {
      if (!open) return;
      try {
        call({ op: 'close' }, 'close');
      } finally {
        shut();
      }
    },
  };
  return conn;
}
