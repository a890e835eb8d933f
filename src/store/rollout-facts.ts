import type { SqlConnection } from './sql-connection.js';
import { toDevice, type DeviceRow, type RolloutDeviceRecord } from './rollouts.js';

/** A rollout device with what the bus bridge last stored about it: its retained state's summary and its highest event seq. */
export interface OpenRolloutDevice {
  device: RolloutDeviceRecord;
  /** null: the device never sent a state. */
  state: { online: boolean; releaseId: string | null; updatedAt: string } | null;
  /** Highest stored event seq of the device, or null when none is stored. */
  lastSeq: number | null;
}

/** An event body of the three types the rollout gate reads. */
export interface GateEvent {
  type: 'release-applied' | 'release-refused' | 'telemetry';
  event: Record<string, unknown>;
}

/** Reads for the rollout gate: rollout devices joined with the bus bridge's state and events. */
export interface RolloutFactsRepository {
  /** Every device of a wave still on its way through the gate (waiting, assigned or applied), in rollout order. */
  openWave(rolloutId: string, wave: number): OpenRolloutDevice[];
  /** The open devices of a wave the clock may have moved: every waiting one, assigned ones assigned by `assignedBy` and applied ones applied by `appliedBy` (ISO times). */
  dueDevices(rolloutId: string, wave: number, cutoffs: { assignedBy: string; appliedBy: string }): OpenRolloutDevice[];
  /** The same as openWave for only the given devices (those of them in the wave and still open). */
  openDevices(rolloutId: string, wave: number, deviceIds: readonly string[]): OpenRolloutDevice[];
  /** The device's latest retained state message as it published it, or null. */
  stateMessage(deviceId: string): unknown;
  /** release-applied, release-refused and telemetry events of a device after a seq, ascending. */
  gateEventsAfter(deviceId: string, seq: number): GateEvent[];
  /** The release a device reports running, and whether it is online (null: never heard from). */
  reported(deviceId: string): { online: boolean; releaseId: string | null } | null;
}

interface JoinedRow extends DeviceRow {
  ds_online: number | null;
  ds_release: string | null;
  ds_updated: string | null;
  last_seq: number | null;
}

function toOpen(r: JoinedRow): OpenRolloutDevice {
  return {
    device: toDevice(r),
    state: r.ds_updated === null ? null : { online: r.ds_online === 1, releaseId: r.ds_release, updatedAt: r.ds_updated },
    lastSeq: r.last_seq,
  };
}

export function createRolloutFactsRepository(db: SqlConnection): RolloutFactsRepository {
  const stateRow = db.prepare('SELECT online, release_id FROM device_state WHERE device_id = ?');
  const stateOf = db.prepare('SELECT state FROM device_state WHERE device_id = ?').pluck();
  // One query for the whole wave: each open device with its retained state and its highest stored event seq.
  const joined = `SELECT rd.*, ds.online AS ds_online, ds.release_id AS ds_release, ds.updated_at AS ds_updated,
      (SELECT e.seq FROM device_events e WHERE e.device_id = rd.device_id ORDER BY e.seq DESC LIMIT 1) AS last_seq
    FROM rollout_devices rd LEFT JOIN device_state ds ON ds.device_id = rd.device_id`;
  const openRows = db.prepare(`${joined} WHERE rd.rollout_id = ? AND rd.wave = ? AND rd.status IN ('waiting', 'assigned', 'applied') ORDER BY rd.position`);
  // Times are stored as toISOString() writes them (fixed width, UTC), so they order as strings.
  const dueRows = db.prepare(`${joined} WHERE rd.rollout_id = ? AND rd.wave = ? AND (rd.status = 'waiting'
      OR (rd.status = 'assigned' AND rd.assigned_at <= ?) OR (rd.status = 'applied' AND rd.applied_at <= ?)) ORDER BY rd.position`);
  // Given devices by the primary key (rollout_id, device_id): one statement for a JSON array of ids, read by each
  // dialect's own table function (both name their column "value").
  const idsOfJson = db.dialect === 'postgres' ? 'json_array_elements_text(?::json)' : 'json_each(?)';
  const someRows = db.prepare(`${joined} WHERE rd.rollout_id = ? AND rd.device_id IN (SELECT value FROM ${idsOfJson}) AND rd.wave = ?
      AND rd.status IN ('waiting', 'assigned', 'applied')`);
  const eventsAfter = db.prepare(`SELECT type, event FROM device_events WHERE device_id = ? AND seq > ?
      AND type IN ('release-applied', 'release-refused', 'telemetry') ORDER BY seq`);

  return {
    openWave: function openWave(rolloutId, wave) {
      return (openRows.all(rolloutId, wave) as JoinedRow[]).map(toOpen);
    },
    dueDevices: function dueDevices(rolloutId, wave, cutoffs) {
      return (dueRows.all(rolloutId, wave, cutoffs.assignedBy, cutoffs.appliedBy) as JoinedRow[]).map(toOpen);
    },
    openDevices: function openDevices(rolloutId, wave, deviceIds) {
      return (someRows.all(rolloutId, JSON.stringify(deviceIds), wave) as JoinedRow[]).map(toOpen);
    },
    stateMessage: function stateMessage(deviceId) {
      const text = stateOf.get(deviceId) as string | null | undefined;
      return text ? (JSON.parse(text) as unknown) : null;
    },
    gateEventsAfter: function gateEventsAfter(deviceId, seq) {
      return (eventsAfter.all(deviceId, seq) as Array<{ type: GateEvent['type']; event: string }>).map((e) => ({
        type: e.type,
        event: JSON.parse(e.event) as Record<string, unknown>,
      }));
    },
    reported: function reported(deviceId) {
      const row = stateRow.get(deviceId) as { online: number; release_id: string | null } | undefined;
      return row ? { online: row.online === 1, releaseId: row.release_id } : null;
    },
  };
}
