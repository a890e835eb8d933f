import type { SqlConnection } from './sql-connection.js';

/** Kinds kept with a version history. Profiles have their own table (revisions carry a report). */
export type VersionedKind = 'device-class' | 'network' | 'task' | 'model';

export interface DocumentRecord<T = unknown> {
  kind: VersionedKind;
  id: string;
  version: number;
  createdAt: string;
  createdBy: string;
  document: T;
}

interface Row {
  kind: VersionedKind;
  id: string;
  version: number;
  body: string;
  created_at: string;
  created_by: string;
}

function toRecord<T>(row: Row): DocumentRecord<T> {
  return {
    kind: row.kind,
    id: row.id,
    version: row.version,
    createdAt: row.created_at,
    createdBy: row.created_by,
    document: JSON.parse(row.body) as T,
  };
}

export interface DocumentRepository {
  /** Inserts version 1; returns null when a document of that kind and id already exists. */
  create<T>(kind: VersionedKind, id: string, document: T, actor: string, at: string): DocumentRecord<T> | null;
  /** Appends the next version; returns null when there is no such document. Older versions stay readable. */
  update<T>(kind: VersionedKind, id: string, document: T, actor: string, at: string): DocumentRecord<T> | null;
  latest<T>(kind: VersionedKind, id: string): DocumentRecord<T> | null;
  version<T>(kind: VersionedKind, id: string, version: number): DocumentRecord<T> | null;
  /** Every version, oldest first. */
  history<T>(kind: VersionedKind, id: string): DocumentRecord<T>[];
  /** The latest version of each document of a kind, by id. */
  list<T>(kind: VersionedKind): DocumentRecord<T>[];
}

export function createDocumentRepository(db: SqlConnection): DocumentRepository {
  const insert = db.prepare(
    'INSERT INTO documents (kind, id, version, body, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)',
  );
  const latestRow = db.prepare('SELECT * FROM documents WHERE kind = ? AND id = ? ORDER BY version DESC LIMIT 1');
  const versionRow = db.prepare('SELECT * FROM documents WHERE kind = ? AND id = ? AND version = ?');
  const historyRows = db.prepare('SELECT * FROM documents WHERE kind = ? AND id = ? ORDER BY version');
  const listRows = db.prepare(`
    SELECT d.* FROM documents d
    JOIN (SELECT id, MAX(version) AS version FROM documents WHERE kind = ? GROUP BY id) m
      ON d.id = m.id AND d.version = m.version
    WHERE d.kind = ? ORDER BY d.id`);

  function latest<T>(kind: VersionedKind, id: string): DocumentRecord<T> | null {
    const row = latestRow.get(kind, id) as Row | undefined;
    return row ? toRecord<T>(row) : null;
  }

  return {
    create: function create(kind, id, document, actor, at) {
      if (latest(kind, id)) return null;
      insert.run(kind, id, 1, JSON.stringify(document), at, actor);
      return latest(kind, id);
    },
    update: function update(kind, id, document, actor, at) {
      const current = latest(kind, id);
      if (!current) return null;
      insert.run(kind, id, current.version + 1, JSON.stringify(document), at, actor);
      return latest(kind, id);
    },
    latest,
    version: function version(kind, id, v) {
      const row = versionRow.get(kind, id, v) as Row | undefined;
      return row ? toRecord(row) : null;
    },
    history: function history(kind, id) {
      return (historyRows.all(kind, id) as Row[]).map((r) => toRecord(r));
    },
    list: function list(kind) {
      return (listRows.all(kind, kind) as Row[]).map((r) => toRecord(r));
    },
  };
}
