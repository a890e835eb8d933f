import type { LeaderLeaseRepository } from '../store/leader-leases.js';

/** Whether this replica may run the fleet's engines now; asked before every act that must happen once per fleet. */
export interface LeaderLock {
  /** Who this replica is in the lease table. */
  readonly holder: string;
  /** True while the lease is held with at least one poll interval left before it could expire. */
  held(): boolean;
  /** One attempt now (take, or renew); returns held(). A failed attempt (the database unreachable) drops the lease at once. */
  poll(): boolean;
  /** Calls the listener when held() changes as seen by poll(); returns the unsubscribe. */
  onChange(listener: (held: boolean) => void): () => void;
  /** Polls now and then every `pollMs`. */
  start(): void;
  /** Stops polling and gives the lease up, so another replica takes over at its next poll. */
  stop(): void;
}

export interface LeaseLockOptions {
  leases: Pick<LeaderLeaseRepository, 'tryAcquire' | 'release'>;
  /** The lease's name: one per kind of work ('fleet-engines'). */
  name: string;
  /** This replica's id (unique among the replicas: e.g. host name and process id). */
  holder: string;
  clock: { now(): Date };
  /** How often the lease is renewed or tried, in ms (1,000 by default). */
  pollMs?: number;
  /** How long a lease lasts without renewal, in ms (5 × pollMs by default): a dead holder's lease is free after it. */
  leaseMs?: number;
  log?: (line: string) => void;
}

/**
 * A leader lock made of a lease row with an expiry (src/store/leader-leases.ts), so it works on every store
 * backend and across processes sharing one. The holder renews every poll; a replica that dies stops renewing
 * and its lease is free `leaseMs` later, when the next replica to poll takes it. The holder counts itself as
 * leader only until one poll interval before its lease ends, so it has stopped acting before anyone else may
 * start (replicas' clocks are assumed to agree within that interval: on one machine they are the same clock).
 */
export function createLeaseLock(options: LeaseLockOptions): LeaderLock {
  const { leases, name, holder, clock } = options;
  const log = options.log ?? (() => {});
  const pollMs = options.pollMs ?? 1000;
  const leaseMs = options.leaseMs ?? 5 * pollMs;
  if (!(pollMs > 0) || !(leaseMs > 2 * pollMs)) throw new RangeError(`a lease of ${leaseMs} ms must last more than two polls of ${pollMs} ms`);
  const listeners = new Set<(held: boolean) => void>();
  let validUntilMs: number | null = null;
  let lastSeen = false;
  let timer: ReturnType<typeof setInterval> | null = null;

  const held = () => validUntilMs !== null && clock.now().getTime() < validUntilMs - pollMs;

  function notify() {
    const now = held();
    if (now === lastSeen) return;
    lastSeen = now;
    log(`leader: ${holder} ${now ? 'holds' : 'no longer holds'} the ${name} lease`);
    for (const listener of [...listeners]) listener(now);
  }

  function poll(): boolean {
    try {
      const attempt = leases.tryAcquire(name, holder, clock.now().getTime(), leaseMs);
      validUntilMs = attempt.held ? attempt.lease.expiresAtMs : null;
    } catch (e) {
      // The lease cannot be renewed, so another replica may take it soon: stop acting now, not at expiry.
      validUntilMs = null;
      log(`leader: ${name} lease not renewed (${e instanceof Error ? e.message : String(e)})`);
    }
    notify();
    return held();
  }

  return {
    holder,
    held,
    poll,
    onChange: function onChange(listener) {
      listeners.add(listener);
      return () => void listeners.delete(listener);
    },
    start: function start() {
      if (timer) return;
      poll();
      timer = setInterval(poll, pollMs);
      timer.unref();
    },
    stop: function stop() {
      if (timer) clearInterval(timer);
      timer = null;
      const had = validUntilMs !== null;
      validUntilMs = null;
      if (had) {
        try {
          leases.release(name, holder);
        } catch (e) {
          log(`leader: ${name} lease not released (${e instanceof Error ? e.message : String(e)}); it expires on its own`);
        }
      }
      notify();
    },
  };
}

/** The lock of a server that runs alone (the default): always held. */
export function createSoleLock(holder = 'sole'): LeaderLock {
  return {
    holder,
    held: () => true,
    poll: () => true,
    onChange: () => () => {},
    start: () => {},
    stop: () => {},
  };
}
