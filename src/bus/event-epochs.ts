import { LEGACY_EPOCH, type DeviceEventEpochRepository, type EventEpochRecord } from '../store/device-event-epochs.js';
import type { DeviceEventRepository } from '../store/device-events.js';
import type { EventCursor } from './event-cursor.js';

/** Where one epoch's events go: stored seq = base + the device's seq, for device seqs up to `limit`. */
export interface EpochSpan {
  base: number;
  /** Highest device seq the epoch may still store: null for the device's current epoch, the seqs it had when the next began for an older one. */
  limit: number | null;
  /** True when this call began the epoch (the device's event log was made anew). */
  started: boolean;
}

export interface EventEpochs {
  /**
   * The span of a device's epoch, beginning it when unseen: a new epoch starts after every seq the device
   * has stored and moves the device's cursor there (the old log's gaps can no longer be filled: it is gone).
   * Call inside the transaction that stores the events.
   */
  span(deviceId: string, epoch: string, at: string): EpochSpan;
  /** Forgets what is in memory (after a rolled-back transaction). */
  reset(): void;
}

/**
 * The event-log epochs of each device. An agent numbers its events from 1 in a log it made with a random
 * epoch; when its data folder is wiped it starts again from 1 under a new epoch. Giving each epoch its own
 * run of stored seqs keeps the new log's events (instead of dropping them as repeats of the old one), keeps
 * stored seqs increasing with time for every reader, and still recognises a replay of an older epoch's
 * batch: its seqs map to where they were stored before. Agents that send no epoch are in LEGACY_EPOCH,
 * which starts at 0 and needs no record until another epoch follows it.
 */
export function createEventEpochs(deps: {
  epochs: DeviceEventEpochRepository;
  events: Pick<DeviceEventRepository, 'maxSeq' | 'contiguousSeq'>;
  cursor: EventCursor;
  /** Keep each device's epochs in memory (one server alone stores events); replicas read them every batch. */
  cache?: boolean;
}): EventEpochs {
  const known = new Map<string, EventEpochRecord[]>();

  function load(deviceId: string): EventEpochRecord[] {
    if (deps.cache === false) return deps.epochs.list(deviceId);
    let list = known.get(deviceId);
    if (!list) known.set(deviceId, (list = deps.epochs.list(deviceId)));
    return list;
  }

  function begin(deviceId: string, list: EventEpochRecord[], epoch: string, at: string): EpochSpan {
    const stored = Math.max(deps.events.maxSeq(deviceId), deps.events.contiguousSeq(deviceId));
    // Bases strictly increase, so they order the epochs even when one stored nothing.
    const last = list[list.length - 1];
    const base = last ? Math.max(stored, last.baseSeq + 1) : stored;
    if (!last && stored > 0) {
      // The events stored so far were the legacy epoch's: record it so a replay of them is still recognised.
      const legacy = { epoch: LEGACY_EPOCH, baseSeq: 0, startedAt: at };
      deps.epochs.insert(deviceId, legacy);
      list.push(legacy);
    }
    const record = { epoch, baseSeq: base, startedAt: at };
    deps.epochs.insert(deviceId, record);
    list.push(record);
    deps.cursor.restartAt(deviceId, base);
    return { base, limit: null, started: !(list.length === 1 && stored === 0) };
  }

  return {
    span: function span(deviceId, epoch, at) {
      const list = load(deviceId);
      if (list.length === 0 && epoch === LEGACY_EPOCH) return { base: 0, limit: null, started: false };
      const i = list.findIndex((e) => e.epoch === epoch);
      if (i < 0) return begin(deviceId, list, epoch, at);
      const next = list[i + 1];
      const base = list[i]!.baseSeq;
      return { base, limit: next ? next.baseSeq - base : null, started: false };
    },
    reset: function reset() {
      known.clear();
    },
  };
}
