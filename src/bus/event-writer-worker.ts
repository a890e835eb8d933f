// Worker thread of the event writer: its own connection to the server's database (WAL lets it write
// while the main connection reads), writing the batches the bridge posts, one at a time.
import { parentPort, workerData } from 'node:worker_threads';
import { openEventWriterStore } from '../store/writer-connection.js';
import { writeBatch, type IngestBatch } from './event-batch.js';
import { batchWriterOf } from './event-writer.js';

const { location, busyTimeoutMs, cursorMode } = workerData as { location: string; busyTimeoutMs: number; cursorMode: 'memory' | 'stored' };
const store = openEventWriterStore(location, busyTimeoutMs);
const writer = batchWriterOf(store, cursorMode);

parentPort!.on('message', function onBatch(message: { id: number; batch: IngestBatch } | { close: true }) {
  if ('close' in message) {
    store.close();
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
