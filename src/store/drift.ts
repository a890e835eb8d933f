import type { SqlConnection } from './sql-connection.js';
import type { DriftEpisode, DriftQuantity } from '../schema/drift.js';

export type { DriftQuantity };
/** A stored drift episode. */
export type DriftRecord = DriftEpisode;

interface Row {
  id: number;
  device_id: string;
  device_class_id: string;
  quantity: DriftQuantity;
  onset_at: string;
  cleared_at: string | null;
  device_factor: number;
  class_factor: number;
  deviation: number;
  tolerance: number;
}

function toRecord(r: Row): DriftRecord {
  return {
    id: r.id,
    deviceId: r.device_id,
    deviceClassId: r.device_class_id,
    quantity: r.quantity,
    onsetAt: r.onset_at,
    clearedAt: r.cleared_at,
    deviceFactor: r.device_factor,
    classFactor: r.class_factor,
    deviation: r.deviation,
    tolerance: r.tolerance,
  };
}

export interface DriftRepository {
  /** The open episode of a device and quantity, if it is drifting now. */
  open(deviceId: string, quantity: DriftQuantity): DriftRecord | null;
  onset(entry: Omit<DriftRecord, 'id' | 'clearedAt'>): DriftRecord;
  clear(id: number, at: string): void;
  /** Newest first; `openOnly` keeps the episodes still running. */
  list(filter?: { deviceId?: string; openOnly?: boolean; limit?: number }): DriftRecord[];
}

export function createDriftRepository(db: SqlConnection): DriftRepository {
  const openRow = db.prepare('SELECT * FROM drift_events WHERE device_id = ? AND quantity = ? AND cleared_at IS NULL ORDER BY id DESC LIMIT 1');
  const insertRow = db.prepare(`INSERT INTO drift_events (device_id, device_class_id, quantity, onset_at, cleared_at, device_factor,
      class_factor, deviation, tolerance) VALUES (?, ?, ?, ?, NULL, ?, ?, ?, ?) RETURNING *`);
  const clearRow = db.prepare('UPDATE drift_events SET cleared_at = ? WHERE id = ? AND cleared_at IS NULL');
  const listRows = db.prepare(`SELECT * FROM drift_events WHERE (CAST(@deviceId AS TEXT) IS NULL OR device_id = @deviceId)
      AND (@openOnly = 0 OR cleared_at IS NULL) ORDER BY id DESC LIMIT @limit`);

  return {
    open: function open(deviceId, quantity) {
      const row = openRow.get(deviceId, quantity) as Row | undefined;
      return row ? toRecord(row) : null;
    },
    onset: function onset(e) {
      return toRecord(insertRow.get(e.deviceId, e.deviceClassId, e.quantity, e.onsetAt, e.deviceFactor, e.classFactor, e.deviation, e.tolerance) as Row);
    },
    clear: function clear(id, at) {
      clearRow.run(at, id);
    },
    list: function list(filter = {}) {
      const limit = Math.min(Math.max(1, Math.floor(filter.limit ?? 100)), 1000);
      return (listRows.all({ deviceId: filter.deviceId ?? null, openOnly: filter.openOnly ? 1 : 0, limit }) as Row[]).map(toRecord);
    },
  };
}
