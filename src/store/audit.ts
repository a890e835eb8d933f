import type { SqlConnection } from './sql-connection.js';

export interface AuditEntry {
  id: number;
  at: string;
  actor: string;
  /** What happened, "<kind>.<verb>": e.g. "device-class.create", "release.create", "token.revoke". */
  action: string;
  /** What it happened to, "<kind>/<id>". */
  target: string;
  detail: unknown;
}

export interface AuditFilter {
  actor?: string;
  action?: string;
  target?: string;
  /** ISO timestamps, inclusive. */
  from?: string;
  to?: string;
  limit?: number;
}

interface Row {
  id: number;
  at: string;
  actor: string;
  action: string;
  target: string;
  detail: string;
}

export interface AuditRepository {
  record(entry: Omit<AuditEntry, 'id'>): AuditEntry;
  /** Newest first. */
  query(filter?: AuditFilter): AuditEntry[];
}

export const AUDIT_DEFAULT_LIMIT = 100;
export const AUDIT_MAX_LIMIT = 1000;

export function createAuditRepository(db: SqlConnection): AuditRepository {
  const insertRow = db.prepare('INSERT INTO audit (at, actor, action, target, detail) VALUES (?, ?, ?, ?, ?) RETURNING id').pluck();

  return {
    record: function record(entry) {
      const id = insertRow.get(entry.at, entry.actor, entry.action, entry.target, JSON.stringify(entry.detail ?? null)) as number;
      return { id, ...entry };
    },
    query: function query(filter = {}) {
      const where: string[] = [];
      const params: unknown[] = [];
      const add = (clause: string, value: unknown) => {
        where.push(clause);
        params.push(value);
      };
      if (filter.actor !== undefined) add('actor = ?', filter.actor);
      if (filter.action !== undefined) add('action = ?', filter.action);
      if (filter.target !== undefined) add('target = ?', filter.target);
      if (filter.from !== undefined) add('at >= ?', filter.from);
      if (filter.to !== undefined) add('at <= ?', filter.to);
      const limit = Math.min(Math.max(1, Math.floor(filter.limit ?? AUDIT_DEFAULT_LIMIT)), AUDIT_MAX_LIMIT);
      const sql = `SELECT * FROM audit ${where.length ? `WHERE ${where.join(' AND ')}` : ''} ORDER BY id DESC LIMIT ?`;
      const rows = db.prepare(sql).all(...params, limit) as Row[];
      return rows.map((r) => ({ id: r.id, at: r.at, actor: r.actor, action: r.action, target: r.target, detail: JSON.parse(r.detail) }));
    },
  };
}
