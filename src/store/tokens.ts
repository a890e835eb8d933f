import type { SqlConnection } from './sql-connection.js';
import { hashToken, newToken } from './credentials.js';

export const ROLES = ['viewer', 'engineer', 'operator', 'admin'] as const;
export type Role = (typeof ROLES)[number];

export interface TokenRecord {
  id: number;
  role: Role;
  label: string;
  createdAt: string;
  createdBy: string;
  revokedAt: string | null;
}

interface Row {
  id: number;
  hash: string;
  role: Role;
  label: string;
  created_at: string;
  created_by: string;
  revoked_at: string | null;
}

function toRecord(row: Row): TokenRecord {
  return { id: row.id, role: row.role, label: row.label, createdAt: row.created_at, createdBy: row.created_by, revokedAt: row.revoked_at };
}

export interface TokenRepository {
  /** Creates a token and returns its secret, which is stored only as a sha256 hash. */
  create(input: { role: Role; label: string; actor: string; at: string; secret?: string }): { token: TokenRecord; secret: string };
  /** The live (not revoked) token with this secret, or null. */
  authenticate(secret: string): TokenRecord | null;
  get(id: number): TokenRecord | null;
  list(): TokenRecord[];
  /** Marks a token revoked; returns the record, or null when there is no such token. Revoking twice keeps the first time. */
  revoke(id: number, at: string): TokenRecord | null;
  count(): number;
  /** True when a token with this secret exists, revoked or not. */
  exists(secret: string): boolean;
}

export function createTokenRepository(db: SqlConnection): TokenRepository {
  const insertRow = db.prepare('INSERT INTO tokens (hash, role, label, created_at, created_by) VALUES (?, ?, ?, ?, ?) RETURNING id').pluck();
  const byHash = db.prepare('SELECT * FROM tokens WHERE hash = ?');
  const byId = db.prepare('SELECT * FROM tokens WHERE id = ?');
  const allRows = db.prepare('SELECT * FROM tokens ORDER BY id');
  const revokeRow = db.prepare('UPDATE tokens SET revoked_at = COALESCE(revoked_at, ?) WHERE id = ?');
  const countRows = db.prepare('SELECT COUNT(*) AS n FROM tokens');

  function get(id: number): TokenRecord | null {
    const row = byId.get(id) as Row | undefined;
    return row ? toRecord(row) : null;
  }

  return {
    create: function create({ role, label, actor, at, secret = newToken() }) {
      const id = insertRow.get(hashToken(secret), role, label, at, actor) as number;
      return { token: get(id)!, secret };
    },
    authenticate: function authenticate(secret) {
      const row = byHash.get(hashToken(secret)) as Row | undefined;
      return row && row.revoked_at === null ? toRecord(row) : null;
    },
    get,
    list: function list() {
      return (allRows.all() as Row[]).map(toRecord);
    },
    revoke: function revoke(id, at) {
      revokeRow.run(at, id);
      return get(id);
    },
    count: function count() {
      return (countRows.get() as { n: number }).n;
    },
    exists: function exists(secret) {
      return byHash.get(hashToken(secret)) !== undefined;
    },
  };
}
