import type Database from 'better-sqlite3';
import type { Release } from '../../protocol/release.js';
import { toDevice, type DeviceRow, type RolloutDeviceRecord } from '../../store/rollouts.js';
import type { DeviceFacts } from './gate.js';

interface StateRow {
  online: number;
  release_id: string | null;
  updated_at: string;
}

interface JoinedRow {
  ds_online: number | null;
  ds_release: string | null;
  ds_updated: string | null;
  last_seq: number | null;
}

interface EventRow {
  type: string;
  event: string;
}

/** The parts of a device's state message the gate reads. */
interface ReportedState {
  refused?: { releaseId: string | null; reason: string } | null;
  pending?: { releaseId: string; reason: string } | null;
}

export interface WaveInput {
  rolloutId: string;
  wave: number;
  release: Release;
  nowMs: number;
  waveStartMs: number;
  /** Read telemetry for applied devices (the gate checks latency). */
  needTelemetry: boolean;
}

export interface FactsReader {
  /** Facts about every device of a wave still on its way through the gate, from one query plus event reads where needed. */
  openWave(input: WaveInput): Array<{ device: RolloutDeviceRecord; facts: DeviceFacts }>;
  /** The same for only the given devices (those of them in the wave and still open): one statement, a key lookup each. */
  openDevices(input: WaveInput, deviceIds: Iterable<string>): Array<{ device: RolloutDeviceRecord; facts: DeviceFacts }>;
  /**
   * The same for the open devices the clock may have moved: every waiting device, assigned ones assigned at or
   * before `assignedBy` and applied ones applied at or before `appliedBy` (ISO times). The wave's rows are
   * filtered inside SQLite; state and events are read only for the rows that pass.
   */
  dueDevices(input: WaveInput, cutoffs: { assignedBy: string; appliedBy: string }): Array<{ device: RolloutDeviceRecord; facts: DeviceFacts }>;
  /** The release a device reports running, and whether it is online (null: never heard from). */
  reported(deviceId: string): { online: boolean; releaseId: string | null } | null;
}

const since = (nowMs: number, iso: string | null) => (iso === null ? null : Math.max(0, nowMs - Date.parse(iso)));

/**
 * Reads the bus bridge's tables for the rollout gate: the retained state (online, running release, refused,
 * pending) and the events a device sent after it was assigned: release-applied, release-refused and
 * telemetry on this release. The state's `refused` counts only when the state arrived after the assignment.
 */
export function createFactsReader(db: Database.Database): FactsReader {
  const stateRow = db.prepare('SELECT online, release_id, updated_at FROM device_state WHERE device_id = ?');
  const stateOf = db.prepare('SELECT state FROM device_state WHERE device_id = ?').pluck();
  // One query for the whole wave: each open device with its retained state and its highest stored event seq.
  const joined = `SELECT rd.*, ds.online AS ds_online, ds.release_id AS ds_release, ds.updated_at AS ds_updated,
      (SELECT e.seq FROM device_events e WHERE e.device_id = rd.device_id ORDER BY e.seq DESC LIMIT 1) AS last_seq
    FROM rollout_devices rd LEFT JOIN device_state ds ON ds.device_id = rd.device_id`;
  const openRows = db.prepare(`${joined} WHERE rd.rollout_id = ? AND rd.wave = ? AND rd.status IN ('waiting', 'assigned', 'applied') ORDER BY rd.position`);
  // Times are stored as toISOString() writes them (fixed width, UTC), so they order as strings.
  const dueRows = db.prepare(`${joined} WHERE rd.rollout_id = ? AND rd.wave = ? AND (rd.status = 'waiting'
      OR (rd.status = 'assigned' AND rd.assigned_at <= ?) OR (rd.status = 'applied' AND rd.applied_at <= ?)) ORDER BY rd.position`);
  // Given devices by the primary key (rollout_id, device_id): one statement for a JSON array of ids.
  const someRows = db.prepare(`${joined} WHERE rd.rollout_id = ? AND rd.device_id IN (SELECT value FROM json_each(?)) AND rd.wave = ?
      AND rd.status IN ('waiting', 'assigned', 'applied')`);
  const eventsAfter = db.prepare(`SELECT type, event FROM device_events WHERE device_id = ? AND seq > ?
      AND type IN ('release-applied', 'release-refused', 'telemetry') ORDER BY seq`);

  function factsOf(d: RolloutDeviceRecord, row: StateRow | undefined, lastSeq: number | null, release: Release, nowMs: number, waveStartMs: number, needTelemetry: boolean): DeviceFacts {
    const runs = row?.release_id === release.id;
    let applied = runs;
    let refusedReason: string | null = null;
    let pendingReason: string | null = null;
    const telemetry = { frames: 0, measuredMsSum: 0, predictedMsSum: 0 };
    // Read only what the device's step needs: a waiting device its online flag, an assigned one that does not
    // run the release yet its refusals and holds, an applied one its telemetry (when the gate checks latency).
    // Cheap checks first: most devices of a large wave have said nothing new since the last pass.
    const stateIsNew = row !== undefined && d.assignedAt !== null && Date.parse(row.updated_at) >= Date.parse(d.assignedAt);
    const newEvents = d.status !== 'waiting' && (lastSeq ?? 0) > d.eventsAfterSeq;
    // The state message itself is read only for a device that said something since it was assigned.
    const stateText = d.status === 'assigned' && !runs && stateIsNew ? (stateOf.get(d.deviceId) as string | null | undefined) : null;
    if (stateText) {
      const reported = JSON.parse(stateText) as ReportedState;
      if (reported.refused && reported.refused.releaseId === release.id) refusedReason = reported.refused.reason;
      if (reported.pending && reported.pending.releaseId === release.id) pendingReason = reported.pending.reason;
    }
    if (newEvents && ((d.status === 'assigned' && !runs) || (d.status === 'applied' && needTelemetry))) {
      for (const e of eventsAfter.all(d.deviceId, d.eventsAfterSeq) as EventRow[]) {
        const body = JSON.parse(e.event) as Record<string, unknown>;
        if (e.type === 'release-applied' && body.releaseId === release.id) applied = true;
        else if (e.type === 'release-refused' && body.releaseId === release.id) refusedReason = String(body.reason);
        else if (e.type === 'telemetry' && body.releaseId === release.id) {
          const predicted = release.tasks[String(body.task)]?.predicted.inferenceMs;
          const frames = Number(body.frames);
          if (predicted === undefined || !(frames > 0)) continue;
          telemetry.frames += frames;
          telemetry.measuredMsSum += frames * Number(body.inferenceMsMean);
          telemetry.predictedMsSum += frames * predicted;
        }
      }
    }
    // A device that runs the release has applied it, whatever it refused before (e.g. before it was fixed).
    if (applied) refusedReason = null;
    return {
      status: d.status,
      online: row?.online === 1,
      sinceWaveStartMs: Math.max(0, nowMs - waveStartMs),
      sinceAssignedMs: since(nowMs, d.assignedAt),
      sinceAppliedMs: since(nowMs, d.appliedAt),
      applied,
      refusedReason,
      pendingReason,
      telemetry,
    };
  }

  function fromRow(r: DeviceRow & JoinedRow, w: WaveInput) {
    const device = toDevice(r);
    const row: StateRow | undefined = r.ds_updated === null ? undefined : { online: r.ds_online!, release_id: r.ds_release, updated_at: r.ds_updated };
    return { device, facts: factsOf(device, row, r.last_seq, w.release, w.nowMs, w.waveStartMs, w.needTelemetry) };
  }

  return {
    openWave: function openWave(w) {
      return (openRows.all(w.rolloutId, w.wave) as Array<DeviceRow & JoinedRow>).map((r) => fromRow(r, w));
    },
    dueDevices: function dueDevices(w, cutoffs) {
      return (dueRows.all(w.rolloutId, w.wave, cutoffs.assignedBy, cutoffs.appliedBy) as Array<DeviceRow & JoinedRow>).map((r) => fromRow(r, w));
    },
    openDevices: function openDevices(w, deviceIds) {
      return (someRows.all(w.rolloutId, JSON.stringify([...deviceIds]), w.wave) as Array<DeviceRow & JoinedRow>).map((r) => fromRow(r, w));
    },
    reported: function reported(deviceId) {
      const row = stateRow.get(deviceId) as StateRow | undefined;
      return row ? { online: row.online === 1, releaseId: row.release_id } : null;
    },
  };
}
