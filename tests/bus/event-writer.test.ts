import { afterAll, describe, expect, it } from 'vitest';
import type { IngestBatch } from '../../src/bus/event-batch.js';
import { createInlineEventWriter, startWorkerEventWriter, type EventWriter } from '../../src/bus/event-writer.js';
import type { Store } from '../../src/store/index.js';
import { openTestStore } from '../support/store-backend.js';
import { tempDir } from '../support/agent-fixtures.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';

const dirs: Array<{ remove(): void }> = [];
afterAll(() => dirs.forEach((d) => d.remove()));

const AT = '2025-03-01T08:00:00.000Z';
/** Demo data: motion events of a greenhouse scout. */
function batch(deviceId: string, seqs: number[]): IngestBatch {
  return {
    at: AT,
    events: [[deviceId, {
      seqs, tss: seqs.map(() => AT), types: seqs.map(() => 'motion'),
      jsons: seqs.map((seq) => JSON.stringify({ seq, ts: AT, type: 'motion', moving: seq % 2 === 0 })),
    }]],
    states: [],
  };
}

const writers: Array<{ name: string; open(store: Store): Promise<EventWriter> }> = [
  { name: 'on a worker thread with its own connection', open: (store) => startWorkerEventWriter({ location: store.location }) },
  { name: 'on the calling thread', open: async (store) => createInlineEventWriter(store) },
];

for (const w of writers) {
  describe(`event writer ${w.name}`, () => {
    it('acks the highest contiguous seq once committed: the events are readable on the main connection when the write resolves', async () => {
      const dir = tempDir('writer');
      dirs.push(dir);
      const store = openTestStore(dir.path);
      store.devices.enrol({ id: 'gh-w-01', deviceClassId: 'gh-scout-a', tags: [], actor: 'test', at: AT });
      const writer = await w.open(store);
      try {
        const count = () => sqlHandle(store).prepare('SELECT COUNT(*) FROM device_events WHERE device_id = ?').pluck().get('gh-w-01');
        expect(await writer.write(batch('gh-w-01', [1, 2, 4]))).toMatchObject({ acks: [['gh-w-01', 2]], eventsStored: 3, eventsDuplicate: 0 });
        expect(count()).toBe(3);
        expect(await writer.write(batch('gh-w-01', [2, 3]))).toMatchObject({ acks: [['gh-w-01', 4]], eventsStored: 1, eventsDuplicate: 1 });
        expect(count()).toBe(4);
        expect(sqlHandle(store).prepare('SELECT contiguous_seq FROM device_event_cursor WHERE device_id = ?').pluck().get('gh-w-01')).toBe(4);
      } finally {
        await writer.close();
        store.close();
      }
    });

    it('a batch that fails stores nothing, and its seqs never count toward a later ack', async () => {
      const dir = tempDir('writer-fail');
      dirs.push(dir);
      const store = openTestStore(dir.path);
      store.devices.enrol({ id: 'gh-w-02', deviceClassId: 'gh-scout-a', tags: [], actor: 'test', at: AT });
      const writer = await w.open(store);
      try {
        await writer.write(batch('gh-w-02', [1, 2]));
        // The state in the same batch cannot be bound (a release version that is an object: SQLite refuses to bind it, PostgreSQL to read it as bigint): the whole
        // transaction, event 3 included, rolls back.
        const failing = batch('gh-w-02', [3]);
        failing.states.push(['gh-w-02', {
          v: 1, online: true, agentVersion: 't', ts: AT, releaseId: 'r', releaseVersion: {} as unknown as number, activeTask: null,
          profileId: null, profileRevision: null, moving: false, pending: null, refused: null, lastSeq: 3,
        }]);
        await expect(writer.write(failing)).rejects.toThrow(/bind|invalid input syntax for type bigint/);
        expect(sqlHandle(store).prepare('SELECT seq FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all('gh-w-02')).toEqual([1, 2]);
        expect((await writer.write(batch('gh-w-02', [4]))).acks).toEqual([['gh-w-02', 2]]);
        expect((await writer.write(batch('gh-w-02', [3]))).acks).toEqual([['gh-w-02', 4]]);
      } finally {
        await writer.close();
        store.close();
      }
    });
  });
}
