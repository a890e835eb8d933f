import type { SqlConnection } from './sql-connection.js';

/** The epoch of agents that send none (older agents, and logs made before epochs existed). */
export const LEGACY_EPOCH = '';

/** One epoch of a device's event log: its events are stored under seq base_seq + the device's own seq. */
export interface EventEpochRecord {
  epoch: string;
  baseSeq: number;
  startedAt: string;
}

export interface DeviceEventEpochRepository {
  /** Every recorded epoch of a device, by base seq ascending (the last one is the current one). */
  list(deviceId: string): EventEpochRecord[];
  /** Records a new epoch. Call inside the transaction that stores its first events. */
  insert(deviceId: string, epoch: EventEpochRecord): void;
}

interface Row {
  epoch: string;
  base_seq: number;
  started_at: string;
}

export function createDeviceEventEpochRepository(db: SqlConnection): DeviceEventEpochRepository {
  // Base seqs of one device strictly increase from epoch to epoch (the bus makes them so): they order the epochs.
  const listRows = db.prepare('SELECT epoch, base_seq, started_at FROM device_event_epochs WHERE device_id = ? ORDER BY base_seq');
  const insertRow = db.prepare('INSERT INTO device_event_epochs (device_id, epoch, base_seq, started_at) VALUES (?, ?, ?, ?)');
  return {
    list: function list(deviceId) {
      return (listRows.all(deviceId) as Row[]).map((r) => ({ epoch: r.epoch, baseSeq: r.base_seq, startedAt: r.started_at }));
    },
    insert: function insert(deviceId, e) {
      insertRow.run(deviceId, e.epoch, e.baseSeq, e.startedAt);
    },
  };
}
