import type Database from 'better-sqlite3';

/** A stored release: the signed form exactly as it was signed. Releases never change once stored. */
export interface ReleaseRecord {
  id: string;
  deviceClassId: string;
  version: number;
  createdAt: string;
  createdBy: string;
  /** The signed release (`{release, signature, keyId}` of src/protocol/release.ts), parsed from storage. */
  signed: unknown;
}

interface Row {
  id: string;
  device_class_id: string;
  version: number;
  signed: string;
  created_at: string;
  created_by: string;
}

function toRecord(row: Row): ReleaseRecord {
  return {
    id: row.id,
    deviceClassId: row.device_class_id,
    version: row.version,
    createdAt: row.created_at,
    createdBy: row.created_by,
    signed: JSON.parse(row.signed),
  };
}

export interface ReleaseRepository {
  /** The version the next release of a device class gets: one more than the highest so far. */
  nextVersion(deviceClassId: string): number;
  insert(record: ReleaseRecord): ReleaseRecord;
  get(id: string): ReleaseRecord | null;
  list(filter?: { deviceClassId?: string }): ReleaseRecord[];
}

export function createReleaseRepository(db: Database.Database): ReleaseRepository {
  const maxVersion = db.prepare('SELECT MAX(version) AS v FROM releases WHERE device_class_id = ?');
  const insertRow = db.prepare(
    'INSERT INTO releases (id, device_class_id, version, signed, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)',
  );
  const oneRow = db.prepare('SELECT * FROM releases WHERE id = ?');
  const allRows = db.prepare('SELECT * FROM releases ORDER BY device_class_id, version');
  const classRows = db.prepare('SELECT * FROM releases WHERE device_class_id = ? ORDER BY version');

  function get(id: string): ReleaseRecord | null {
    const row = oneRow.get(id) as Row | undefined;
    return row ? toRecord(row) : null;
  }

  return {
    nextVersion: function nextVersion(deviceClassId) {
      const row = maxVersion.get(deviceClassId) as { v: number | null };
      return (row.v ?? 0) + 1;
    },
    insert: function insert(record) {
      insertRow.run(record.id, record.deviceClassId, record.version, JSON.stringify(record.signed), record.createdAt, record.createdBy);
      return get(record.id)!;
    },
    get,
    list: function list(filter = {}) {
      const rows = filter.deviceClassId ? classRows.all(filter.deviceClassId) : allRows.all();
      return (rows as Row[]).map(toRecord);
    },
  };
}
