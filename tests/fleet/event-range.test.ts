import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Store } from '../../src/store/index.js';
import { openTestStore } from '../support/store-backend.js';
import { tempDir } from '../support/agent-fixtures.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';

// Events of one device with gaps in its numbering (lost or not yet resent) and uneven spacing in time:
// the seq range of a time window must equal a full scan's answer (a brute-force check, common practice).
const dir = tempDir('fleet-range');
let store: Store;
const START_MS = Date.parse('2025-04-01T06:00:00.000Z');
const stored: Array<{ seq: number; ms: number }> = [];

beforeAll(() => {
  store = openTestStore(dir.path);
  const insert = sqlHandle(store).prepare('INSERT INTO device_events (device_id, seq, ts, type, event, received_at) VALUES (?, ?, ?, ?, ?, ?)');
  let ms = START_MS;
  let a = 12345;
  const random = () => ((a = (a * 1103515245 + 12345) % 2147483648) / 2147483648);
  store.transaction(() => {
    for (let seq = 1; seq <= 3000; seq++) {
      // Bursts and long pauses: steps from 1 ms to about an hour; the same millisecond twice now and then.
      ms += random() < 0.05 ? Math.floor(random() * 3_600_000) : Math.floor(random() * 2000);
      if (random() < 0.2) continue; // a gap in the numbering
      const ts = new Date(ms).toISOString();
      insert.run('range-dev', seq, ts, 'motion', `{"seq":${seq},"ts":"${ts}","type":"motion","moving":false}`, ts);
      stored.push({ seq, ms });
    }
  });
});

afterAll(() => {
  store.close();
  dir.remove();
});

function scan(fromMs: number, toMs: number): { loSeq: number; hiSeq: number } {
  const first = (at: number) => stored.find((e) => e.ms >= at)?.seq ?? stored.at(-1)!.seq + 1;
  return { loSeq: first(fromMs), hiSeq: first(toMs) };
}

describe('seq range of a time window by interpolation and bisection over the primary key', () => {
  it('agrees with a full scan on 2,000 random windows, including ones before, after and between all events', () => {
    const reader = store.eventRanges;
    const endMs = stored.at(-1)!.ms;
    let b = 777;
    const random = () => ((b = (b * 1103515245 + 12345) % 2147483648) / 2147483648);
    for (let i = 0; i < 2000; i++) {
      const fromMs = START_MS - 3_600_000 + Math.floor(random() * (endMs - START_MS + 7_200_000));
      const toMs = fromMs + Math.floor(random() * 86_400_000);
      const got = reader.seqRange('range-dev', fromMs, toMs);
      const want = scan(fromMs, toMs);
      // Boundaries may sit anywhere in a gap: compare the stored seqs each range holds.
      const held = (r: { loSeq: number; hiSeq: number }) => stored.filter((e) => e.seq >= r.loSeq && e.seq < r.hiSeq).map((e) => e.seq);
      expect(held(got)).toEqual(held(want));
    }
    // Exactly at a stored event's time: that event is inside [from, to).
    const mid = stored[1000]!;
    expect(reader.seqRange('range-dev', mid.ms, mid.ms + 1).loSeq).toBe(stored.find((e) => e.ms === mid.ms)!.seq);
    expect(reader.seqRange('nobody', START_MS, START_MS + 1)).toEqual({ loSeq: 1, hiSeq: 1 });
  });
});

describe('a typed window in one read (one statement on PostgreSQL)', () => {
  // A second device: two event types interleaved, times written with offsets other than Z now and then
  // (the schema allows them), so the search must compare instants, not strings.
  const typed: Array<{ seq: number; ms: number; type: string }> = [];
  beforeAll(() => {
    const insert = sqlHandle(store).prepare('INSERT INTO device_events (device_id, seq, ts, type, event, received_at) VALUES (?, ?, ?, ?, ?, ?)');
    let ms = START_MS;
    let c = 4242;
    const random = () => ((c = (c * 1103515245 + 12345) % 2147483648) / 2147483648);
    const withOffset = (t: number) => new Date(t + 2 * 3_600_000).toISOString().replace('Z', '+02:00');
    store.transaction(() => {
      for (let seq = 1; seq <= 1500; seq++) {
        ms += random() < 0.05 ? Math.floor(random() * 3_600_000) : Math.floor(random() * 5000);
        if (random() < 0.15) continue;
        const type = random() < 0.2 ? 'task-switched' : 'motion';
        const ts = random() < 0.3 ? withOffset(ms) : new Date(ms).toISOString();
        insert.run('typed-dev', seq, ts, type, JSON.stringify({ seq, ts, type }), ts);
        typed.push({ seq, ms, type });
      }
    });
  });

  it('agrees with a full scan on 1,000 random windows: range, events inside, the one before and the one after', () => {
    const reader = store.eventRanges;
    const endMs = typed.at(-1)!.ms;
    let d = 99;
    const random = () => ((d = (d * 1103515245 + 12345) % 2147483648) / 2147483648);
    const first = (at: number) => typed.find((e) => e.ms >= at)?.seq ?? typed.at(-1)!.seq + 1;
    for (let i = 0; i < 1000; i++) {
      // Some windows start exactly on a stored event's millisecond.
      const fromMs = random() < 0.1 ? typed[Math.floor(random() * typed.length)]!.ms : START_MS - 3_600_000 + Math.floor(random() * (endMs - START_MS + 7_200_000));
      const toMs = fromMs + Math.floor(random() * 6 * 3_600_000);
      const loSeq = first(fromMs);
      const hiSeq = Math.max(loSeq, first(toMs));
      const switches = typed.filter((e) => e.type === 'task-switched');
      const got = reader.typedWindow('typed-dev', 'task-switched', fromMs, toMs);
      const held = (r: { loSeq: number; hiSeq: number }) => typed.filter((e) => e.seq >= r.loSeq && e.seq < r.hiSeq).map((e) => e.seq);
      expect(held(got.range)).toEqual(held({ loSeq, hiSeq }));
      expect(got.events.map((e) => e.seq)).toEqual(switches.filter((e) => e.seq >= loSeq && e.seq < hiSeq).map((e) => e.seq));
      expect(got.before?.seq ?? null).toBe(switches.filter((e) => e.seq < loSeq).at(-1)?.seq ?? null);
      expect(got.after?.seq ?? null).toBe(switches.find((e) => e.seq >= hiSeq)?.seq ?? null);
      // The same answer as the separate reads it stands for.
      const range = reader.seqRange('typed-dev', fromMs, toMs);
      expect(held(got.range)).toEqual(held(range));
    }
    for (const e of reader.typedWindow('typed-dev', 'task-switched', START_MS, endMs + 1).events) expect(e.event.type).toBe('task-switched');
  });

  it('answers a device with no events with an empty window at seq 1', () => {
    expect(store.eventRanges.typedWindow('nobody', 'task-switched', START_MS, START_MS + 1)).toEqual({ range: { loSeq: 1, hiSeq: 1 }, events: [], before: null, after: null });
  });
});
