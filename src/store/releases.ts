import type { SqlConnection } from './sql-connection.js';
import { signedReleaseSchema, type SignedRelease, type SignedReleaseText } from '../protocol/release.js';

/**
 * A stored release. `raw` is the signed release's text exactly as it was stored: what every publisher sends
 * and the API serves, byte for byte. `parsed` is its reading, for looking inside; it is never re-serialized
 * to be sent, because parsing may add defaults the signature does not cover. Releases never change once stored.
 */
export interface ReleaseRecord extends SignedReleaseText {
  id: string;
  deviceClassId: string;
  version: number;
  createdAt: string;
  createdBy: string;
}

export interface NewRelease {
  id: string;
  deviceClassId: string;
  version: number;
  createdAt: string;
  createdBy: string;
  /** The signed release; its JSON text is what is stored and later sent. */
  signed: SignedRelease;
}

interface Row {
  id: string;
  device_class_id: string;
  version: number;
  signed: string;
  created_at: string;
  created_by: string;
}

export interface ReleaseRepository {
  /** The version the next release of a device class gets: one more than the highest so far. */
  nextVersion(deviceClassId: string): number;
  insert(record: NewRelease): ReleaseRecord;
  /** The stored release, or null; throws naming the release when its stored text no longer reads as a signed release. */
  get(id: string): ReleaseRecord | null;
  list(filter?: { deviceClassId?: string }): ReleaseRecord[];
  /** The highest-sequence release of every device class that has one, by class id. */
  latestByClass(): ReleaseRecord[];
}

/** Readings kept per release id (a rollout reads its release for every batch); a bounded number, oldest dropped first. */
const PARSED_CACHE_SIZE = 256;

export function createReleaseRepository(db: SqlConnection): ReleaseRepository {
  const maxVersion = db.prepare('SELECT MAX(version) AS v FROM releases WHERE device_class_id = ?');
  const insertRow = db.prepare(
    'INSERT INTO releases (id, device_class_id, version, signed, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)',
  );
  const oneRow = db.prepare('SELECT * FROM releases WHERE id = ?');
  const allRows = db.prepare('SELECT * FROM releases ORDER BY device_class_id, version');
  const classRows = db.prepare('SELECT * FROM releases WHERE device_class_id = ? ORDER BY version');
  const latestRows = db.prepare(`SELECT r.* FROM releases r
    JOIN (SELECT device_class_id, MAX(version) AS v FROM releases GROUP BY device_class_id) m
      ON m.device_class_id = r.device_class_id AND m.v = r.version
    ORDER BY r.device_class_id`);
  const cache = new Map<string, ReleaseRecord>();

  function toRecord(row: Row): ReleaseRecord {
    const known = cache.get(row.id);
    if (known && known.raw === row.signed) return known;
    let json: unknown;
    try {
      json = JSON.parse(row.signed);
    } catch (e) {
      throw new Error(`stored release '${row.id}' is not JSON: ${(e as Error).message}`);
    }
    const parsed = signedReleaseSchema.safeParse(json);
    if (!parsed.success) {
      const first = parsed.error.issues[0];
      throw new Error(`stored release '${row.id}' does not read as a signed release at ${first?.path.join('.') || '(root)'}: ${first?.message ?? 'invalid'}`);
    }
    const record: ReleaseRecord = {
      id: row.id,
      deviceClassId: row.device_class_id,
      version: row.version,
      createdAt: row.created_at,
      createdBy: row.created_by,
      raw: row.signed,
      parsed: parsed.data,
    };
    if (cache.size >= PARSED_CACHE_SIZE) cache.delete(cache.keys().next().value!);
    cache.set(row.id, record);
    return record;
  }

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
    latestByClass: function latestByClass() {
      return (latestRows.all() as Row[]).map(toRecord);
    },
  };
}
