import type Database from 'better-sqlite3';

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
 * Leases in the `leader_leases` table. Its own IMMEDIATE transaction per attempt: the write lock is taken at
 * BEGIN, so the read and the write see no other replica's change in between (SQLite documentation, "BEGIN
 * TRANSACTION": IMMEDIATE starts a write transaction at once).
 */
export function createLeaderLeaseRepository(db: Database.Database): LeaderLeaseRepository {
  const select = db.prepare('SELECT * FROM leader_leases WHERE name = ?');
  const insert = db.prepare('INSERT INTO leader_leases (name, holder, expires_at_ms, fence) VALUES (?, ?, ?, 1)');
  const update = db.prepare('UPDATE leader_leases SET holder = ?, expires_at_ms = ?, fence = ? WHERE name = ?');
  const drop = db.prepare('UPDATE leader_leases SET expires_at_ms = 0 WHERE name = ? AND holder = ?');

  const attempt = db.transaction((name: string, holder: string, nowMs: number, leaseMs: number): LeaseAttempt => {
    const row = select.get(name) as Row | undefined;
    const expiresAtMs = Math.floor(nowMs + leaseMs);
    if (!row) {
      insert.run(name, holder, expiresAtMs);
      return { held: true, lease: { name, holder, expiresAtMs, fence: 1 } };
    }
    if (row.holder !== holder && row.expires_at_ms > nowMs) return { held: false, lease: toRecord(row) };
    const fence = row.holder === holder && row.expires_at_ms > nowMs ? row.fence : row.fence + 1;
    update.run(holder, expiresAtMs, fence, name);
    return { held: true, lease: { name, holder, expiresAtMs, fence } };
  });

  return {
    tryAcquire: function tryAcquire(name, holder, nowMs, leaseMs) {
      return attempt.immediate(name, holder, nowMs, leaseMs);
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
