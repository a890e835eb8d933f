import type { StateMessage } from '../protocol/messages.js';
import type { DeviceConnectionRepository } from '../store/device-connections.js';
import type { DeviceEventColumns, DeviceEventRepository } from '../store/device-events.js';
import type { DeviceStateRepository } from '../store/device-state.js';
import { recordConnectionChanges, type ConnectionSighting } from './connection-notes.js';
import type { EventCursor } from './event-cursor.js';

/** What the bridge received in one turn of the event loop, in a form that crosses to a worker thread. */
export interface IngestBatch {
  /** When the server received it (ISO 8601). */
  at: string;
  events: Array<[deviceId: string, events: DeviceEventColumns]>;
  states: Array<[deviceId: string, state: StateMessage]>;
  /** Every state message of the batch in arrival order (states above keep only each device's latest). */
  connections?: Array<[deviceId: string, seen: ConnectionSighting]>;
}

/** What one committed batch changed: each device's new ack (highest contiguous seq), and counts. */
export interface IngestResult {
  acks: Array<[deviceId: string, upTo: number]>;
  eventsStored: number;
  eventsDuplicate: number;
  statesStored: number;
  /** Connection changes recorded (came online, went offline). */
  connectionChanges: number;
}

export interface BatchWriter {
  events: DeviceEventRepository;
  states: DeviceStateRepository;
  connections: DeviceConnectionRepository;
  cursor: EventCursor;
  transaction<T>(fn: () => T): T;
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
        const fresh = w.events.insertColumns(deviceId, columns, batch.at);
        result.eventsStored += fresh;
        result.eventsDuplicate += columns.seqs.length - fresh;
        result.acks.push([deviceId, w.cursor.advance(deviceId, columns.seqs)]);
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
    throw e;
  }
}
