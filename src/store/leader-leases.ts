import type { SqlConnection } from './sql-connection.js';

/** Who holds a lease, until when (ms since the epoch, the holder's clock) and its fence (one more at every change of holder). */
export interface LeaseRecord {
  name: string;
  holder: string;
  expiresAtMs: number;
  fence: number;
}

/** The outcome of one attempt: held (taken or renewed, with the new expiry), or held by someone else until a time. */
export type LeaseAttempt = { held: true; lease: LeaseRecord } | { held: false; lease: LeaseRecord };

export interface LeaderLeaseRepository {
  /**
   * Takes the lease when it is free or expired, renews it when `holder` has it; in one transaction, so two
   * replicas that try at once cannot both get it. A lease that changes holder gets the next fence.
   */
  tryAcquire(name: string, holder: string, nowMs: number, leaseMs: number): LeaseAttempt;
  /** Gives the lease up at once when `holder` has it (a clean stop); returns whether it did. */
  release(name: string, holder: string): boolean;
  get(name: string): LeaseRecord | null;
}

interface Row {
  name: string;
  holder: string;
  expires_at_ms: number;
  fence: number;
}

const toRecord = (r: Row): LeaseRecord => ({ name: r.name, holder: r.holder, expiresAtMs: r.expires_at_ms, fence: r.fence });

/**
 * Leases in the `leader_leases` table, on either backend. Taking or renewing is ONE conditional upsert, so two
 * replicas that try at once cannot both get the lease: PostgreSQL's INSERT … ON CONFLICT DO UPDATE locks the
 * conflicting row and re-checks its WHERE against the committed row (PostgreSQL documentation, "INSERT", ON
 * CONFLICT clause), and SQLite runs one writer at a time. SET reads the row as it was before the update in both.
 */
export function createLeaderLeaseRepository(db: SqlConnection): LeaderLeaseRepository {
  const select = db.prepare('SELECT name, holder, expires_at_ms, fence FROM leader_leases WHERE name = ?');
  const take = db.prepare(`INSERT INTO leader_leases (name, holder, expires_at_ms, fence) VALUES (@name, @holder, @expiresAtMs, 1)
    ON CONFLICT (name) DO UPDATE SET
      fence = CASE WHEN leader_leases.holder = excluded.holder AND leader_leases.expires_at_ms > @nowMs THEN leader_leases.fence ELSE leader_leases.fence + 1 END,
      holder = excluded.holder,
      expires_at_ms = excluded.expires_at_ms
    WHERE leader_leases.holder = excluded.holder OR leader_leases.expires_at_ms <= @nowMs`);
  const drop = db.prepare('UPDATE leader_leases SET expires_at_ms = 0 WHERE name = ? AND holder = ?');

  return {
    tryAcquire: function tryAcquire(name, holder, nowMs, leaseMs) {
      const took = take.run({ name, holder, expiresAtMs: Math.floor(nowMs + leaseMs), nowMs: Math.floor(nowMs) }).changes > 0;
      const row = select.get(name) as Row;
      return { held: took && row.holder === holder, lease: toRecord(row) };
    },
    release: function release(name, holder) {
      return drop.run(name, holder).changes > 0;
    },
    get: function get(name) {
      const row = select.get(name) as Row | undefined;
      return row ? toRecord(row) : null;
    },
  };
}
