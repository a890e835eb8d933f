import type { DeviceEventRepository } from '../store/device-events.js';

/**
 * Tracks, per device, the highest seq up to which every event is stored. Seqs that arrive ahead of
 * a gap wait in memory until the gap fills, so the ack never covers an event the server lacks and
 * the device resends from the gap. Loaded from the database the first time a device is seen.
 */
export interface EventCursor {
  /** Records stored seqs of a device and returns its new contiguous seq. Call inside the same transaction as the inserts. */
  advance(deviceId: string, storedSeqs: readonly number[]): number;
  /** Moves a device's contiguous seq up to `seq` (a new event-log epoch starts there), dropping the gaps below it. */
  restartAt(deviceId: string, seq: number): void;
  /** Forgets what is in memory (after a rolled-back transaction); the next advance reloads from the database. */
  reset(): void;
}

export function createEventCursor(events: DeviceEventRepository): EventCursor {
  const cursors = new Map<string, { contiguous: number; ahead: Set<number> }>();

  function load(deviceId: string) {
    let c = cursors.get(deviceId);
    if (!c) {
      const contiguous = events.contiguousSeq(deviceId);
      c = { contiguous, ahead: new Set(events.seqsAbove(deviceId, contiguous)) };
      cursors.set(deviceId, c);
    }
    return c;
  }

  return {
    advance: function advance(deviceId, storedSeqs) {
      const c = load(deviceId);
      const before = c.contiguous;
      for (const seq of storedSeqs) if (seq > c.contiguous) c.ahead.add(seq);
      while (c.ahead.delete(c.contiguous + 1)) c.contiguous += 1;
      if (c.contiguous !== before) events.setContiguousSeq(deviceId, c.contiguous);
      return c.contiguous;
    },
    restartAt: function restartAt(deviceId, seq) {
      const c = load(deviceId);
      if (seq <= c.contiguous) return;
      c.contiguous = seq;
      for (const s of c.ahead) if (s <= seq) c.ahead.delete(s);
      while (c.ahead.delete(c.contiguous + 1)) c.contiguous += 1;
      events.setContiguousSeq(deviceId, c.contiguous);
    },
    reset: function reset() {
      cursors.clear();
    },
  };
}

/**
 * The cursor when several replicas store one device's events (MQTT 5 shared subscriptions hand consecutive
 * batches of a device to different replicas): nothing is kept in memory, every advance reads the stored cursor
 * (locked: replicas take turns per device) and the stored seqs above it inside the batch's write transaction, so
 * the ack is the highest contiguous seq in the database, whoever stored the rest. Costs one indexed read of the seqs above the cursor (usually just the
 * batch) per device and batch.
 */
export function createStoredEventCursor(events: DeviceEventRepository): EventCursor {
  return {
    advance: function advance(deviceId, _storedSeqs) {
      const before = events.lockContiguousSeq(deviceId);
      let contiguous = before;
      for (const seq of events.seqsAbove(deviceId, before)) {
        if (seq !== contiguous + 1) break;
        contiguous = seq;
      }
      if (contiguous !== before) events.setContiguousSeq(deviceId, contiguous);
      return contiguous;
    },
    restartAt: function restartAt(deviceId, seq) {
      const before = events.lockContiguousSeq(deviceId);
      if (seq <= before) return;
      let contiguous = seq;
      for (const s of events.seqsAbove(deviceId, seq)) {
        if (s !== contiguous + 1) break;
        contiguous = s;
      }
      events.setContiguousSeq(deviceId, contiguous);
    },
    reset: () => {},
  };
}
