// Worker thread of the event writer: its own better-sqlite3 connection to the server's database (WAL
// lets it write while the main connection reads), writing the batches the bridge posts, one at a time.
import Database from 'better-sqlite3';
import { parentPort, workerData } from 'node:worker_threads';
import { createDeviceEventRepository } from '../store/device-events.js';
import { createDeviceConnectionRepository } from '../store/device-connections.js';
import { createDeviceStateRepository } from '../store/device-state.js';
import { createEventCursor } from './event-cursor.js';
import { writeBatch, type IngestBatch } from './event-batch.js';
import { openWriterConnection } from './event-writer-connection.js';

const { dbPath, busyTimeoutMs } = workerData as { dbPath: string; busyTimeoutMs: number };
const db: Database.Database = openWriterConnection(dbPath, busyTimeoutMs);
const events = createDeviceEventRepository(db);
const writer = { events, states: createDeviceStateRepository(db), connections: createDeviceConnectionRepository(db), cursor: createEventCursor(events), transaction: <T>(fn: () => T): T => db.transaction(fn)() };

parentPort!.on('message', function onBatch(message: { id: number; batch: IngestBatch } | { close: true }) {
  if ('close' in message) {
    db.close();
    parentPort!.close();
    return;
  }
  try {
    parentPort!.postMessage({ id: message.id, ok: true, result: writeBatch(writer, message.batch) });
  } catch (e) {
    parentPort!.postMessage({ id: message.id, ok: false, error: (e as Error).message });
  }
});
parentPort!.postMessage({ ready: true });
