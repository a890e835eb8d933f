import type { SqlConnection } from './sql-connection.js';
import { hashDeviceSecret, isScryptHash, newSecret, verifyDeviceSecret, verifyPasswordAsync } from './credentials.js';

export interface DeviceRecord {
  id: string;
  deviceClassId: string;
  tags: string[];
  assignedReleaseId: string | null;
  createdAt: string;
  createdBy: string;
  /** When its credentials were revoked (it cannot log in until its password is rotated), or null. */
  revokedAt: string | null;
}

/** The outcome of a device login check; the reason is for the server's metrics and log, never for the caller. */
export type DeviceLoginResult = { ok: true } | { ok: false; reason: 'bad-credentials' | 'revoked' };

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

// A revoked device's stored hash is replaced by this marker and its time: no secret hashes to it.
const REVOKED_PREFIX = 'revoked$';

function toRecord(row: Row): DeviceRecord {
  return {
    id: row.id,
    deviceClassId: row.device_class_id,
    tags: JSON.parse(row.tags) as string[],
    assignedReleaseId: row.assigned_release_id,
    createdAt: row.created_at,
    createdBy: row.created_by,
    revokedAt: row.password_hash.startsWith(REVOKED_PREFIX) ? row.password_hash.slice(REVOKED_PREFIX.length) : null,
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
  /** Enrols a device and returns its MQTT password (a random 192-bit secret), stored only as a keyed hash; null when the id is taken. */
  enrol(input: { id: string; deviceClassId: string; tags: string[]; actor: string; at: string }): { device: DeviceRecord; password: string } | null;
  get(id: string): DeviceRecord | null;
  list(filter?: { deviceClassId?: string; tag?: string }): DeviceRecord[];
  /**
   * True only for an enrolled, unrevoked device whose password matches its keyed hash. A legacy scrypt hash
   * is never checked here (that would block the event loop): use checkLogin, which migrates it.
   */
  verifyCredentials(deviceId: string, password: string): boolean;
  /** verifyCredentials as a promise, legacy scrypt hashes included. */
  verifyCredentialsAsync(deviceId: string, password: string): Promise<boolean>;
  /**
   * The login check of the broker and the weights route: an unknown id costs the same keyed hash and
   * constant-time comparison as an enrolled one. A legacy scrypt hash (from before keyed hashes) is checked
   * once on libuv's thread pool and, when it matches, replaced by the keyed hash.
   */
  checkLogin(deviceId: string, password: string): Promise<DeviceLoginResult>;
  /** Issues a new password (the old one stops working; a revoked device is reinstated); null when there is no such device. */
  rotatePassword(deviceId: string): { device: DeviceRecord; password: string } | null;
  /** Revokes a device's credentials; revoking twice keeps the first time. Null when there is no such device. */
  revoke(deviceId: string, at: string): DeviceRecord | null;
  /** Records the release a device should run and the assignment history row. */
  assign(input: { deviceId: string; releaseId: string; cause: string; actor: string; at: string }): AssignmentRecord;
  assignments(deviceId: string): AssignmentRecord[];
}

export function createDeviceRepository(db: SqlConnection, secretKey: Buffer): DeviceRepository {
  const insertRow = db.prepare(`INSERT INTO devices
    (id, device_class_id, tags, password_hash, assigned_release_id, created_at, created_by) VALUES (?, ?, ?, ?, NULL, ?, ?)`);
  const oneRow = db.prepare('SELECT * FROM devices WHERE id = ?');
  const allRows = db.prepare('SELECT * FROM devices ORDER BY id');
  const hashOf = db.prepare('SELECT password_hash FROM devices WHERE id = ?').pluck();
  const setHash = db.prepare('UPDATE devices SET password_hash = ? WHERE id = ?');
  // Replaces a legacy hash only if no rotation or revocation changed it while scrypt ran.
  const upgradeHash = db.prepare('UPDATE devices SET password_hash = ? WHERE id = ? AND password_hash = ?');
  const revokeRow = db.prepare(`UPDATE devices SET password_hash = ? WHERE id = ? AND password_hash NOT LIKE '${REVOKED_PREFIX}%'`);
  const setRelease = db.prepare('UPDATE devices SET assigned_release_id = ? WHERE id = ?');
  const insertAssignment = db.prepare(
    'INSERT INTO assignments (device_id, release_id, cause, actor, created_at) VALUES (?, ?, ?, ?, ?) RETURNING *',
  );
  const assignmentRows = db.prepare('SELECT * FROM assignments WHERE device_id = ? ORDER BY id');

  function get(id: string): DeviceRecord | null {
    const row = oneRow.get(id) as Row | undefined;
    return row ? toRecord(row) : null;
  }

  function storedHash(deviceId: string): string | null {
    return (hashOf.get(deviceId) as string | undefined) ?? null;
  }

  async function checkLogin(deviceId: string, password: string): Promise<DeviceLoginResult> {
    const stored = storedHash(deviceId);
    if (stored !== null && isScryptHash(stored)) {
      if (!(await verifyPasswordAsync(password, stored))) return { ok: false, reason: 'bad-credentials' };
      upgradeHash.run(hashDeviceSecret(password, secretKey), deviceId, stored);
      return { ok: true };
    }
    if (verifyDeviceSecret(password, stored, secretKey)) return { ok: true };
    return { ok: false, reason: stored?.startsWith(REVOKED_PREFIX) ? 'revoked' : 'bad-credentials' };
  }

  return {
    enrol: function enrol({ id, deviceClassId, tags, actor, at }) {
      if (get(id)) return null;
      const password = newSecret(24);
      insertRow.run(id, deviceClassId, JSON.stringify(tags), hashDeviceSecret(password, secretKey), at, actor);
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
      return verifyDeviceSecret(password, storedHash(deviceId), secretKey);
    },
    verifyCredentialsAsync: async function verifyCredentialsAsync(deviceId, password) {
      return (await checkLogin(deviceId, password)).ok;
    },
    checkLogin,
    rotatePassword: function rotatePassword(deviceId) {
      if (!get(deviceId)) return null;
      const password = newSecret(24);
      setHash.run(hashDeviceSecret(password, secretKey), deviceId);
      return { device: get(deviceId)!, password };
    },
    revoke: function revoke(deviceId, at) {
      if (!get(deviceId)) return null;
      revokeRow.run(`${REVOKED_PREFIX}${at}`, deviceId);
      return get(deviceId);
    },
    assign: function assign({ deviceId, releaseId, cause, actor, at }) {
      setRelease.run(releaseId, deviceId);
      return toAssignment(insertAssignment.get(deviceId, releaseId, cause, actor, at) as AssignmentRow);
    },
    assignments: function assignments(deviceId) {
      return (assignmentRows.all(deviceId) as AssignmentRow[]).map(toAssignment);
    },
  };
}
