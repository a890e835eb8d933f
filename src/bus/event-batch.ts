import type { StateMessage } from '../protocol/messages.js';
import type { DeviceConnectionRepository } from '../store/device-connections.js';
import { LEGACY_EPOCH } from '../store/device-event-epochs.js';
import type { DeviceEventColumns, DeviceEventRepository } from '../store/device-events.js';
import type { DeviceStateRepository } from '../store/device-state.js';
import { recordConnectionChanges, type ConnectionSighting } from './connection-notes.js';
import type { EventCursor } from './event-cursor.js';
import type { EpochSpan, EventEpochs } from './event-epochs.js';

/** What the bridge received in one turn of the event loop, in a form that crosses to a worker thread. */
export interface IngestBatch {
  /** When the server received it (ISO 8601). */
  at: string;
  events: Array<[deviceId: string, events: DeviceEventColumns]>;
  states: Array<[deviceId: string, state: StateMessage]>;
  /** Every state message of the batch in arrival order (states above keep only each device's latest). */
  connections?: Array<[deviceId: string, seen: ConnectionSighting]>;
}

/**
 * What one committed batch changed: each device's new ack (the highest of its seqs up to which every event of
 * its current epoch is stored, and that epoch, absent for the legacy one), and counts.
 */
export interface IngestResult {
  acks: Array<[deviceId: string, upTo: number, epoch?: string]>;
  eventsStored: number;
  eventsDuplicate: number;
  statesStored: number;
  /** Connection changes recorded (came online, went offline), and notes of event logs made anew. */
  connectionChanges: number;
}

export interface BatchWriter {
  events: DeviceEventRepository;
  states: DeviceStateRepository;
  connections: DeviceConnectionRepository;
  cursor: EventCursor;
  epochs: EventEpochs;
  transaction<T>(fn: () => T): T;
}

/** The events of an epoch under their stored seqs (base + the device's seq); an older epoch's beyond its limit are left out. */
function placed(columns: DeviceEventColumns, span: EpochSpan): DeviceEventColumns {
  if (span.base === 0 && span.limit === null) return columns;
  const out: DeviceEventColumns = { seqs: [], tss: [], types: [], jsons: [] };
  for (let i = 0; i < columns.seqs.length; i++) {
    const seq = columns.seqs[i]!;
    if (span.limit !== null && seq > span.limit) continue;
    out.seqs.push(span.base + seq);
    out.tss.push(columns.tss[i]!);
    out.types.push(columns.types[i]!);
    out.jsons.push(columns.jsons[i]!);
  }
  return out;
}

/**
 * Stores one batch in one transaction: events (each (device, seq) once), each device's contiguous
 * cursor, connection changes and device states. After a rollback the cursor forgets what it held in memory, so an ack
 * never covers an event that was not stored; the error is thrown on.
 */
export function writeBatch(w: BatchWriter, batch: IngestBatch): IngestResult {
  const result: IngestResult = { acks: [], eventsStored: 0, eventsDuplicate: 0, statesStored: 0, connectionChanges: 0 };
  const withState = new Set(batch.states.map(([deviceId]) => deviceId));
  try {
    // Devices in id order: replicas writing at once lock their cursor rows in the same order, so they never deadlock over them.
    const events = [...batch.events].sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
    return w.transaction(() => {
      for (const [deviceId, columns] of events) {
        const epoch = columns.epoch ?? LEGACY_EPOCH;
        const span = w.epochs.span(deviceId, epoch, batch.at);
        if (span.started) noteRestart(w, deviceId, batch.at);
        const stored = placed(columns, span);
        const fresh = w.events.insertColumns(deviceId, stored, batch.at);
        result.eventsStored += fresh;
        result.eventsDuplicate += columns.seqs.length - fresh;
        const contiguous = w.cursor.advance(deviceId, stored.seqs);
        // An older epoch's replay is stored (what is missing of it) but not acked: its log is gone, and an ack
        // would reach the device's current log, which numbers other events.
        if (span.limit === null) result.acks.push(epoch === LEGACY_EPOCH ? [deviceId, Math.max(0, contiguous - span.base)] : [deviceId, Math.max(0, contiguous - span.base), epoch]);
        if (span.started) result.connectionChanges += 1;
        if (!withState.has(deviceId)) w.states.touch(deviceId, batch.at);
      }
      // Before the states: a change is judged against what was stored until now.
      if (batch.connections) result.connectionChanges = recordConnectionChanges(batch.connections, w.states, w.connections);
      for (const [deviceId, state] of batch.states) {
        if (state.online) w.states.putState(deviceId, state, batch.at);
        // The last will carries what the device ran when it connected; keep the fuller record, mark it offline.
        else w.states.markOffline(deviceId, batch.at);
        result.statesStored += 1;
      }
      return result;
    });
  } catch (e) {
    w.cursor.reset();
    w.epochs.reset();
    throw e;
  }
}

/**
 * A note in the device's connection record that its event log began anew (a wiped data folder, a new
 * agent install): its events are numbered from 1 again. It keeps the online flag the server holds, so it
 * neither opens nor closes an offline stretch.
 */
function noteRestart(w: BatchWriter, deviceId: string, at: string) {
  const s = w.states.summary(deviceId);
  w.connections.insert({ deviceId, at, online: s?.online ?? false, cause: 'event-log-restarted', releaseId: s?.releaseId ?? null, task: s?.activeTask ?? null });
}
