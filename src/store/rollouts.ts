import type { SqlConnection } from './sql-connection.js';

export const ROLLOUT_STATUSES = ['running', 'paused', 'completed', 'aborted', 'rolling-back', 'rolled-back'] as const;
export type RolloutStatus = (typeof ROLLOUT_STATUSES)[number];
/** Statuses in which a rollout holds its devices: no other rollout may target them. */
export const HOLDING_STATUSES: readonly RolloutStatus[] = ['running', 'paused', 'rolling-back'];

export type RolloutDeviceStatus = 'waiting' | 'assigned' | 'applied' | 'passed' | 'failed' | 'skipped';
export type RollbackStatus = 'assigned' | 'restored' | 'nothing-to-restore';

export interface RolloutRecord {
  id: string;
  releaseId: string;
  deviceClassId: string;
  status: RolloutStatus;
  /** The rollout's settings as created (src/fleet/rollout/spec.ts), parsed from storage. */
  spec: unknown;
  waveCount: number;
  currentWave: number;
  waveStartedAt: string | null;
  /** Why the rollout stopped: the gate's failures (src/fleet/rollout/gate.ts), parsed from storage. */
  pauseReason: unknown;
  /** Who asked for the rollback (the actor of its re-assignments), once asked. */
  rollbackBy: string | null;
  createdAt: string;
  createdBy: string;
  updatedAt: string;
}

export interface RolloutDeviceRecord {
  rolloutId: string;
  deviceId: string;
  wave: number;
  position: number;
  status: RolloutDeviceStatus;
  reason: string | null;
  /** What the device was assigned before this rollout moved it (null: nothing). */
  previousReleaseId: string | null;
  assignmentId: number | null;
  /** When the device was assigned, or when its gate was reopened by a resume. */
  assignedAt: string | null;
  /** The device's highest stored event seq when it was assigned or its gate reopened: only later events count for its gate. */
  eventsAfterSeq: number;
  appliedAt: string | null;
  rollbackStatus: RollbackStatus | null;
  rollbackAssignmentId: number | null;
  /** The re-issue of previousReleaseId a rollback assigns (null for rollbacks recorded before re-issues). */
  restoreReleaseId: string | null;
}

interface RolloutRow {
  id: string;
  release_id: string;
  device_class_id: string;
  status: RolloutStatus;
  spec: string;
  wave_count: number;
  current_wave: number;
  wave_started_at: string | null;
  pause_reason: string | null;
  rollback_by: string | null;
  created_at: string;
  created_by: string;
  updated_at: string;
}

/** A rollout_devices row as SQLite returns it (for readers that join it with other tables). */
export interface DeviceRow {
  rollout_id: string;
  device_id: string;
  wave: number;
  position: number;
  status: RolloutDeviceStatus;
  reason: string | null;
  previous_release_id: string | null;
  assignment_id: number | null;
  assigned_at: string | null;
  events_after_seq: number;
  applied_at: string | null;
  rollback_status: RollbackStatus | null;
  rollback_assignment_id: number | null;
  restore_release_id?: string | null;
}

function toRollout(r: RolloutRow): RolloutRecord {
  return {
    id: r.id,
    releaseId: r.release_id,
    deviceClassId: r.device_class_id,
    status: r.status,
    spec: JSON.parse(r.spec),
    waveCount: r.wave_count,
    currentWave: r.current_wave,
    waveStartedAt: r.wave_started_at,
    pauseReason: r.pause_reason === null ? null : JSON.parse(r.pause_reason),
    rollbackBy: r.rollback_by,
    createdAt: r.created_at,
    createdBy: r.created_by,
    updatedAt: r.updated_at,
  };
}

export function toDevice(r: DeviceRow): RolloutDeviceRecord {
  return {
    rolloutId: r.rollout_id,
    deviceId: r.device_id,
    wave: r.wave,
    position: r.position,
    status: r.status,
    reason: r.reason,
    previousReleaseId: r.previous_release_id,
    assignmentId: r.assignment_id,
    assignedAt: r.assigned_at,
    eventsAfterSeq: r.events_after_seq,
    appliedAt: r.applied_at,
    rollbackStatus: r.rollback_status,
    rollbackAssignmentId: r.rollback_assignment_id,
    restoreReleaseId: r.restore_release_id ?? null,
  };
}

export interface NewRollout {
  id: string;
  releaseId: string;
  deviceClassId: string;
  spec: unknown;
  waveCount: number;
  createdAt: string;
  createdBy: string;
  devices: ReadonlyArray<{ deviceId: string; wave: number }>;
}

export interface RolloutRepository {
  insert(rollout: NewRollout): RolloutRecord;
  get(id: string): RolloutRecord | null;
  list(filter?: { status?: RolloutStatus; limit?: number }): RolloutRecord[];
  /** Rollouts the engine advances: running or rolling back. */
  moving(): RolloutRecord[];
  /** For each given device held by a rollout in a holding status (other than `exceptRolloutId`): which one. */
  holders(deviceIds: readonly string[], exceptRolloutId?: string): Array<{ deviceId: string; rolloutId: string }>;
  devices(rolloutId: string, wave?: number): RolloutDeviceRecord[];
  /** How many devices of a wave are in each status. */
  waveCounts(rolloutId: string, wave: number): Partial<Record<RolloutDeviceStatus, number>>;
  device(rolloutId: string, deviceId: string): RolloutDeviceRecord | null;
  setStatus(id: string, status: RolloutStatus, at: string, pauseReason?: unknown): void;
  startWave(id: string, wave: number, at: string): void;
  /** Moves a rollout into rolling-back on behalf of `by`. */
  startRollback(id: string, by: string, at: string): void;
  /** waiting → assigned; false (and no change) when the device was not waiting: it is never assigned twice. */
  markAssigned(rolloutId: string, deviceId: string, v: { assignmentId: number; previousReleaseId: string | null; at: string; eventsAfterSeq: number }): boolean;
  setDeviceStatus(rolloutId: string, deviceId: string, status: RolloutDeviceStatus, reason: string | null, at: string): void;
  /** A failed device goes through its gate again from `at` (waiting, when it was never assigned): only events after `eventsAfterSeq` count now. */
  reopenDevice(rolloutId: string, deviceId: string, eventsAfterSeq: number, at: string): void;
  /** null → assigned (or nothing-to-restore); false when the device's rollback was already started. */
  markRollback(rolloutId: string, deviceId: string, status: RollbackStatus, assignmentId: number | null): boolean;
  setRollbackStatus(rolloutId: string, deviceId: string, status: RollbackStatus): void;
  /** Every device of the rollout whose previous release is `previousReleaseId` will be restored with `restoreReleaseId`. */
  setRestoreRelease(rolloutId: string, previousReleaseId: string, restoreReleaseId: string): void;
  /** How many assignments rows carry a cause, per device (the idempotency check of a rollout). */
  assignmentCounts(cause: string): Map<string, number>;
}

export function createRolloutRepository(db: SqlConnection): RolloutRepository {
  const insertRollout = db.prepare(`INSERT INTO rollouts (id, release_id, device_class_id, status, spec, wave_count, current_wave,
      wave_started_at, pause_reason, created_at, created_by, updated_at) VALUES (?, ?, ?, 'running', ?, ?, 0, NULL, NULL, ?, ?, ?)`);
  const insertDevice = db.prepare(`INSERT INTO rollout_devices (rollout_id, device_id, wave, position, status) VALUES (?, ?, ?, ?, 'waiting')`);
  const oneRollout = db.prepare('SELECT * FROM rollouts WHERE id = ?');
  const movingRows = db.prepare("SELECT * FROM rollouts WHERE status IN ('running', 'rolling-back') ORDER BY created_at, id");
  const deviceRows = db.prepare('SELECT * FROM rollout_devices WHERE rollout_id = ? ORDER BY wave, position');
  const waveRows = db.prepare('SELECT * FROM rollout_devices WHERE rollout_id = ? AND wave = ? ORDER BY position');
  const countRows = db.prepare('SELECT status, COUNT(*) AS n FROM rollout_devices WHERE rollout_id = ? AND wave = ? GROUP BY status');
  const oneDevice = db.prepare('SELECT * FROM rollout_devices WHERE rollout_id = ? AND device_id = ?');
  const holderOf = db.prepare(`SELECT d.rollout_id AS "rolloutId" FROM rollout_devices d JOIN rollouts r ON r.id = d.rollout_id
      WHERE d.device_id = ? AND r.status IN ('running', 'paused', 'rolling-back') AND r.id <> ?`);
  const setStatusRow = db.prepare('UPDATE rollouts SET status = ?, pause_reason = ?, updated_at = ? WHERE id = ?');
  const restoreRows = db.prepare('UPDATE rollout_devices SET restore_release_id = ? WHERE rollout_id = ? AND previous_release_id = ? AND rollback_status IS NULL');
  const rollbackByRow = db.prepare("UPDATE rollouts SET status = 'rolling-back', rollback_by = ?, pause_reason = NULL, updated_at = ? WHERE id = ?");
  const startWaveRow = db.prepare('UPDATE rollouts SET current_wave = ?, wave_started_at = ?, updated_at = ? WHERE id = ?');
  const assignedRow = db.prepare(`UPDATE rollout_devices SET status = 'assigned', assignment_id = ?, previous_release_id = ?,
      assigned_at = ?, events_after_seq = ?, reason = NULL WHERE rollout_id = ? AND device_id = ? AND status = 'waiting'`);
  const deviceStatusRow = db.prepare(`UPDATE rollout_devices SET status = ?, reason = ?,
      applied_at = CASE WHEN ? = 'applied' THEN ? ELSE applied_at END WHERE rollout_id = ? AND device_id = ?`);
  const reopenRow = db.prepare(`UPDATE rollout_devices SET status = CASE WHEN assignment_id IS NULL THEN 'waiting' ELSE 'assigned' END,
      reason = NULL, events_after_seq = ?, assigned_at = CASE WHEN assignment_id IS NULL THEN NULL ELSE ? END, applied_at = NULL
      WHERE rollout_id = ? AND device_id = ? AND status = 'failed'`);
  const rollbackRow = db.prepare(`UPDATE rollout_devices SET rollback_status = ?, rollback_assignment_id = ?
      WHERE rollout_id = ? AND device_id = ? AND rollback_status IS NULL`);
  const rollbackStatusRow = db.prepare('UPDATE rollout_devices SET rollback_status = ? WHERE rollout_id = ? AND device_id = ?');
  const countsRows = db.prepare('SELECT device_id AS "deviceId", COUNT(*) AS n FROM assignments WHERE cause = ? GROUP BY device_id');

  function get(id: string): RolloutRecord | null {
    const row = oneRollout.get(id) as RolloutRow | undefined;
    return row ? toRollout(row) : null;
  }

  return {
    insert: function insert(r) {
      insertRollout.run(r.id, r.releaseId, r.deviceClassId, JSON.stringify(r.spec), r.waveCount, r.createdAt, r.createdBy, r.createdAt);
      r.devices.forEach((d, i) => insertDevice.run(r.id, d.deviceId, d.wave, i));
      return get(r.id)!;
    },
    get,
    list: function list(filter = {}) {
      const limit = Math.min(Math.max(1, Math.floor(filter.limit ?? 100)), 1000);
      const rows = filter.status
        ? db.prepare('SELECT * FROM rollouts WHERE status = ? ORDER BY created_at DESC, id LIMIT ?').all(filter.status, limit)
        : db.prepare('SELECT * FROM rollouts ORDER BY created_at DESC, id LIMIT ?').all(limit);
      return (rows as RolloutRow[]).map(toRollout);
    },
    moving: function moving() {
      return (movingRows.all() as RolloutRow[]).map(toRollout);
    },
    holders: function holders(deviceIds, exceptRolloutId = '') {
      const out: Array<{ deviceId: string; rolloutId: string }> = [];
      for (const deviceId of deviceIds) {
        for (const row of holderOf.all(deviceId, exceptRolloutId) as Array<{ rolloutId: string }>) out.push({ deviceId, rolloutId: row.rolloutId });
      }
      return out;
    },
    devices: function devices(rolloutId, wave) {
      const rows = wave === undefined ? deviceRows.all(rolloutId) : waveRows.all(rolloutId, wave);
      return (rows as DeviceRow[]).map(toDevice);
    },
    waveCounts: function waveCounts(rolloutId, wave) {
      return Object.fromEntries((countRows.all(rolloutId, wave) as Array<{ status: RolloutDeviceStatus; n: number }>).map((r) => [r.status, r.n]));
    },
    device: function device(rolloutId, deviceId) {
      const row = oneDevice.get(rolloutId, deviceId) as DeviceRow | undefined;
      return row ? toDevice(row) : null;
    },
    setStatus: function setStatus(id, status, at, pauseReason = null) {
      setStatusRow.run(status, pauseReason === null ? null : JSON.stringify(pauseReason), at, id);
    },
    startWave: function startWave(id, wave, at) {
      startWaveRow.run(wave, at, at, id);
    },
    startRollback: function startRollback(id, by, at) {
      rollbackByRow.run(by, at, id);
    },
    markAssigned: function markAssigned(rolloutId, deviceId, v) {
      return assignedRow.run(v.assignmentId, v.previousReleaseId, v.at, v.eventsAfterSeq, rolloutId, deviceId).changes === 1;
    },
    setDeviceStatus: function setDeviceStatus(rolloutId, deviceId, status, reason, at) {
      deviceStatusRow.run(status, reason, status, at, rolloutId, deviceId);
    },
    reopenDevice: function reopenDevice(rolloutId, deviceId, eventsAfterSeq, at) {
      reopenRow.run(eventsAfterSeq, at, rolloutId, deviceId);
    },
    markRollback: function markRollback(rolloutId, deviceId, status, assignmentId) {
      return rollbackRow.run(status, assignmentId, rolloutId, deviceId).changes === 1;
    },
    setRollbackStatus: function setRollbackStatus(rolloutId, deviceId, status) {
      rollbackStatusRow.run(status, rolloutId, deviceId);
    },
    setRestoreRelease: function setRestoreRelease(rolloutId, previousReleaseId, restoreReleaseId) {
      restoreRows.run(restoreReleaseId, rolloutId, previousReleaseId);
    },
    assignmentCounts: function assignmentCounts(cause) {
      return new Map((countsRows.all(cause) as Array<{ deviceId: string; n: number }>).map((r) => [r.deviceId, r.n]));
    },
  };
}
