// Worker thread behind the synchronous PostgreSQL connection (pg-sync-connection.ts): owns ONE pg client, runs
// the statements the main thread posts one at a time, and wakes the main thread (blocked in Atomics.wait)
// after each answer is posted. Plain JavaScript, started without tsx, so a store opens in tens of milliseconds.
import { workerData } from 'node:worker_threads';
import pg from 'pg';

const { port, signal, connection } = workerData;
const flag = new Int32Array(signal);
const INT8 = 20;
const NUMERIC = 1700;

const client = new pg.Client(connection);
let broken = null;
client.on('error', (e) => {
  broken = e;
});
const connected = client.connect();
// Connecting fails late (on the first statement), so a refused connection is answered, not thrown here.
connected.catch((e) => {
  broken = e;
});

function errorOf(e) {
  return {
    message: e?.message ?? String(e),
    code: e?.code ?? null,
    detail: e?.detail ?? null,
    hint: e?.hint ?? null,
    constraint: e?.constraint ?? null,
    table: e?.table ?? null,
    column: e?.column ?? null,
  };
}

// 64-bit integers and numerics arrive as text (pg's default, so nothing is rounded silently): made numbers
// here, refusing an integer beyond 2^53 rather than handing back a different one.
function numbers(result, asArrays) {
  const convert = [];
  result.fields.forEach((f, i) => {
    if (f.dataTypeID === INT8 || f.dataTypeID === NUMERIC) convert.push([asArrays ? i : f.name, f.dataTypeID, f.name]);
  });
  if (convert.length === 0) return result.rows;
  for (const row of result.rows) {
    for (const [key, type, name] of convert) {
      const text = row[key];
      if (text === null || text === undefined) continue;
      const n = Number(text);
      if (type === INT8 && !Number.isSafeInteger(n)) {
        throw Object.assign(new RangeError(`column ${name} holds ${text}, beyond the integers JavaScript keeps exactly (2^53 - 1)`), { code: 'unsafe-integer' });
      }
      row[key] = n;
    }
  }
  return result.rows;
}

async function answer(request) {
  if (request.op === 'close') {
    await client.end().catch(() => undefined);
    return { id: request.id, ok: true };
  }
  await connected.catch(() => undefined);
  if (broken) return { id: request.id, ok: false, error: errorOf(broken) };
  try {
    if (request.op === 'exec') {
      await client.query(request.text);
      return { id: request.id, ok: true, rows: [], rowCount: 0 };
    }
    const config = { text: request.text, values: request.values, ...(request.name ? { name: request.name } : {}), ...(request.pluck ? { rowMode: 'array' } : {}) };
    const result = await client.query(config);
    return { id: request.id, ok: true, rows: numbers(result, Boolean(request.pluck)), rowCount: result.rowCount ?? 0 };
  } catch (e) {
    return { id: request.id, ok: false, error: errorOf(e) };
  }
}

let queue = Promise.resolve();
port.on('message', (request) => {
  queue = queue.then(async () => {
    const reply = await answer(request);
    port.postMessage(reply);
    Atomics.store(flag, 0, 1);
    Atomics.notify(flag, 0);
    if (request.op === 'close') port.close();
  });
});
