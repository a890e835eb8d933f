import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { Store } from '../store/store.js';
import { writeBatch, type BatchWriter, type IngestBatch, type IngestResult } from './event-batch.js';
import { createEventCursor, createStoredEventCursor } from './event-cursor.js';
import { createEventEpochs } from './event-epochs.js';

/** Stores the bridge's batches; resolves after the commit, so an ack is only ever sent for stored events. */
export interface EventWriter {
  readonly kind: 'worker' | 'inline';
  write(batch: IngestBatch): Promise<IngestResult>;
  close(): Promise<void>;
}

/**
 * How the writer knows each device's contiguous seq and event-log epochs: 'memory' when this server alone stores
 * events (read from the database once per device), 'stored' when replicas share the work (read from the database
 * every batch, as another replica may have stored the device's last batch or begun its new epoch).
 */
export type CursorMode = 'memory' | 'stored';

/** The repositories an event writer stores a batch through, with its cursor and epochs. */
export type WriterStore = Pick<Store, 'deviceEvents' | 'deviceEventEpochs' | 'deviceStates' | 'deviceConnections' | 'transaction'>;

export function batchWriterOf(store: WriterStore, cursorMode: CursorMode = 'memory'): BatchWriter {
  const cursor = cursorMode === 'stored' ? createStoredEventCursor(store.deviceEvents) : createEventCursor(store.deviceEvents);
  const epochs = createEventEpochs({ epochs: store.deviceEventEpochs, events: store.deviceEvents, cursor, cache: cursorMode === 'memory' });
  return { events: store.deviceEvents, states: store.deviceStates, connections: store.deviceConnections, cursor, epochs, transaction: store.transaction };
}

/** Writes on the calling thread, through the store's own connection. */
export function createInlineEventWriter(store: WriterStore, cursorMode: CursorMode = 'memory'): EventWriter {
  const writer = batchWriterOf(store, cursorMode);
  return {
    kind: 'inline',
    write: async (batch) => writeBatch(writer, batch),
    close: async () => {},
  };
}

/** The worker's module runs as TypeScript through tsx, as the server does; registered in the worker before it is imported. */
function workerBootstrap(): string {
  const require = createRequire(import.meta.url);
  const tsxApi = pathToFileURL(require.resolve('tsx/esm/api').replace(/\.cjs$/, '.mjs')).href;
  const entry = new URL('./event-writer-worker.ts', import.meta.url).href;
  return `import(${JSON.stringify(tsxApi)}).then((tsx) => { tsx.register(); return import(${JSON.stringify(entry)}); });`;
}

type Reply = { ready: true } | { id: number; ok: true; result: IngestResult } | { id: number; ok: false; error: string };

/**
 * Writes on a worker thread with its own connection to the database file, so inserting and committing
 * run beside the event loop that receives, checks and acknowledges. Batches are written one after
 * another in the order given. If the worker dies, the batches in hand fail (their devices resend them)
 * and the next write starts a new worker.
 */
export async function startWorkerEventWriter(options: { location: string; busyTimeoutMs?: number; cursorMode?: CursorMode; log?: (line: string) => void }): Promise<EventWriter> {
  const log = options.log ?? (() => {});
  const waiting = new Map<number, { resolve(r: IngestResult): void; reject(e: Error): void }>();
  let nextId = 1;
  let closing = false;

  function spawn(): Promise<Worker> {
    const worker = new Worker(workerBootstrap(), { eval: true, workerData: { location: options.location, busyTimeoutMs: options.busyTimeoutMs ?? 5000, cursorMode: options.cursorMode ?? 'memory' } });
    return new Promise<Worker>((resolve, reject) => {
      let ready = false;
      worker.on('message', (m: Reply) => {
        if ('ready' in m) return ((ready = true), resolve(worker));
        const w = waiting.get(m.id);
        waiting.delete(m.id);
        if (m.ok) w?.resolve(m.result);
        else w?.reject(new Error(m.error));
      });
      const fail = (e: Error) => {
        if (!ready) reject(e);
        for (const w of waiting.values()) w.reject(e);
        waiting.clear();
        current = null;
        if (!closing) log(`bus: event writer stopped (${e.message}); the next batch starts a new one`);
      };
      worker.once('error', fail);
      worker.once('exit', (code) => fail(new Error(`event writer exited with code ${code}`)));
    });
  }

  let current: Promise<Worker> | null = spawn();
  await current;

  return {
    kind: 'worker',
    write: async function write(batch) {
      if (closing) throw new Error('the event writer is closed');
      const worker = await (current ??= spawn());
      const id = nextId++;
      return new Promise<IngestResult>((resolve, reject) => {
        waiting.set(id, { resolve, reject });
        worker.postMessage({ id, batch });
      });
    },
    close: async function close() {
      closing = true;
      const worker = await current?.catch(() => null);
      if (!worker) return;
      const exited = new Promise<void>((resolve) => worker.once('exit', () => resolve()));
      worker.postMessage({ close: true });
      await exited;
    },
  };
}
