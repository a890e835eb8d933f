import type { Store } from '../../store/store.js';
import { createHistoryReader, type HistoryWindow } from './intervals.js';
import { historyRecording } from './mcap.js';

/** Builds a device's history recording (MCAP) for a window, from the same reads as the history API. */
export function createRecordingReader(store: Pick<Store, 'eventRanges' | 'devices' | 'deviceConnections'>, producer: string) {
  const history = createHistoryReader(store);
  const events = store.eventRanges;
  const connections = store.deviceConnections;
  return function deviceRecording(deviceId: string, w: HistoryWindow): Promise<Uint8Array> {
    const fromIso = new Date(w.fromMs).toISOString();
    const toIso = new Date(w.toMs).toISOString();
    const range = events.seqRange(deviceId, w.fromMs, w.toMs);
    const stored = [...events.ofType(deviceId, 'task-switched', range), ...events.ofType(deviceId, 'telemetry', range)].sort((a, b) => a.seq - b.seq);
    return historyRecording({
      deviceId,
      fromIso,
      toIso,
      exportedAtIso: new Date(w.nowMs).toISOString(),
      intervals: history.device(deviceId, w),
      events: stored,
      connections: connections.between(deviceId, fromIso, toIso),
      producer,
    });
  };
}
