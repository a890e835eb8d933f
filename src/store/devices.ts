import type Database from 'better-sqlite3';
import { createHash, timingSafeEqual } from 'node:crypto';
import { hashPassword, newSecret, verifyPassword, verifyPasswordAsync } from './credentials.js';

export interface DeviceRecord {
  id: string;
  deviceClassId: string;
  tags: string[];
  assignedReleaseId: string | null;
  createdAt: string;
  createdBy: string;
}

export interface AssignmentRecord {
  id: number;
  deviceId: string;
  releaseId: string;
  /** Why: "manual", or the rollout that made the assignment. */
  cause: string;
  actor: string;
  createdAt: string;
}

interface Row {
  id: string;
  device_class_id: string;
  tags: string;
  password_hash: string;
  assigned_release_id: string | null;
  created_at: string;
  created_by: string;
}

interface AssignmentRow {
  id: number;
  device_id: string;
  release_id: string;
  cause: string;
  actor: string;
  created_at: string;
}

function toRecord(row: Row): DeviceRecord {
  return {
    id: row.id,
    deviceClassId: row.device_class_id,
    tags: JSON.parse(row.tags) as string[],
    assignedReleaseId: row.assigned_release_id,
    createdAt: row.created_at,
    createdBy: row.created_by,
  };
}

function toAssignment(row: AssignmentRow): AssignmentRecord {
  return {
    id: row.id,
    deviceId: row.device_id,
    releaseId: row.release_id,
    cause: row.cause,
    actor: row.actor,
    createdAt: row.created_at,
  };
}

export interface DeviceRepository {
  /** Enrols a device and returns its MQTT password, which is stored only as a scrypt hash; null when the id is taken. */
  enrol(input: { id: string; deviceClassId: string; tags: string[]; actor: string; at: string }): { device: DeviceRecord; password: string } | null;
  get(id: string): DeviceRecord | null;
  list(filter?: { deviceClassId?: string; tag?: string }): DeviceRecord[];
  /** True only for an enrolled device whose password matches. */
  verifyCredentials(deviceId: string, password: string): boolean;
  /** The same, without blocking the event loop on scrypt (for the broker, where a fleet connects at once). */
  verifyCredentialsAsync(deviceId: string, password: string): Promise<boolean>;
  /** Records the release a device should run and the assignment history row. */
  assign(input: { deviceId: string; releaseId: string; cause: string; actor: string; at: string }): AssignmentRecord;
  assignments(deviceId: string): AssignmentRecord[];
}

export function createDeviceRepository(db: Database.Database): DeviceRepository {
  const insertRow = db.prepare(`INSERT INTO devices
    (id, device_class_id, tags, password_hash, assigned_release_id, created_at, created_by) VALUES (?, ?, ?, ?, NULL, ?, ?)`);
  const oneRow = db.prepare('SELECT * FROM devices WHERE id = ?');
  const allRows = db.prepare('SELECT * FROM devices ORDER BY id');
  const setRelease = db.prepare('UPDATE devices SET assigned_release_id = ? WHERE id = ?');
  const insertAssignment = db.prepare(
    'INSERT INTO assignments (device_id, release_id, cause, actor, created_at) VALUES (?, ?, ?, ?, ?)',
  );
  const assignmentById = db.prepare('SELECT * FROM assignments WHERE id = ?');
  const assignmentRows = db.prepare('SELECT * FROM assignments WHERE device_id = ? ORDER BY id');

  function get(id: string): DeviceRecord | null {
    const row = oneRow.get(id) as Row | undefined;
    return row ? toRecord(row) : null;
  }

  // scrypt takes tens of milliseconds and blocks the event loop; a fleet reconnecting at once would queue
  // behind it. A password verified once is remembered (as a sha256, in memory only) for this process, keyed
  // by the stored hash so a changed credential is never matched against the old one.
  const verified = new Map<string, Buffer>();
  const digest = (password: string) => createHash('sha256').update(password, 'utf8').digest();

  return {
    enrol: function enrol({ id, deviceClassId, tags, actor, at }) {
      if (get(id)) return null;
      const password = newSecret(24);
      insertRow.run(id, deviceClassId, JSON.stringify(tags), hashPassword(password), at, actor);
      return { device: get(id)!, password };
    },
    get,
    list: function list(filter = {}) {
      return (allRows.all() as Row[])
        .map(toRecord)
        .filter((d) => (filter.deviceClassId === undefined || d.deviceClassId === filter.deviceClassId))
        .filter((d) => (filter.tag === undefined || d.tags.includes(filter.tag)));
    },
    verifyCredentials: function verifyCredentials(deviceId, password) {
      const row = oneRow.get(deviceId) as Row | undefined;
      if (row === undefined) return false;
      const key = `${deviceId}\u0000${row.password_hash}`;
      const remembered = verified.get(key);
      if (remembered) return timingSafeEqual(remembered, digest(password));
      if (!verifyPassword(password, row.password_hash)) return false;
      verified.set(key, digest(password));
      return true;
    },
    verifyCredentialsAsync: async function verifyCredentialsAsync(deviceId, password) {
      const row = oneRow.get(deviceId) as Row | undefined;
      if (row === undefined) return false;
      const key = `${deviceId}\u0000${row.password_hash}`;
      const remembered = verified.get(key);
      if (remembered) return timingSafeEqual(remembered, digest(password));
      if (!(await verifyPasswordAsync(password, row.password_hash))) return false;
      verified.set(key, digest(password));
      return true;
    },
    assign: function assign({ deviceId, releaseId, cause, actor, at }) {
      setRelease.run(releaseId, deviceId);
      const { lastInsertRowid } = insertAssignment.run(deviceId, releaseId, cause, actor, at);
      return toAssignment(assignmentById.get(lastInsertRowid) as AssignmentRow);
    },
    assignments: function assignments(deviceId) {
      return (assignmentRows.all(deviceId) as AssignmentRow[]).map(toAssignment);
    },
  };
}
