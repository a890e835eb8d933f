/** Why a device login was refused, as counted in the failed-login metric. */
export type LoginRefusal =
  | 'bad-credentials'
  | 'revoked'
  | 'source-limited'
  | 'id-limited'
  | 'client-id-mismatch'
  | 'session-in-use'
  | 'certificate-required'
  | 'certificate-refused';

export interface LoginGuardOptions {
  /** Failed logins allowed from one source address within a window before it is refused unchecked. */
  maxFailuresPerSource?: number;
  /** Failed logins allowed for one device id within a window, from anywhere. */
  maxFailuresPerId?: number;
  windowMs?: number;
  /** Entries kept per table; the oldest are forgotten past this, so a flood of made-up ids cannot grow memory. */
  maxEntries?: number;
  clock?: { now(): Date };
}

export interface LoginGuard {
  /**
   * Starts a login attempt: null when it may be checked, otherwise why it is refused unchecked. An admitted
   * attempt counts against its device id until `succeeded` says otherwise, so a burst of concurrent tries
   * for one id is limited before any check finishes. A source is charged only for failures: a whole fleet
   * behind one address, reconnecting at once after a restart, is not refused.
   */
  attempt(deviceId: string, source: string): 'source-limited' | 'id-limited' | null;
  /** The attempt was wrong: its source is charged too. */
  failed(deviceId: string, source: string): void;
  /** The attempt was correct: it no longer counts, and its source's failures are forgotten (a fixed agent). */
  succeeded(deviceId: string, source: string): void;
}

interface Window {
  startMs: number;
  failures: number;
}

/**
 * Fixed-window counters of failed device logins per source address and per device id, shared by the
 * broker and the weights route. Secrets are 192-bit random values, so the limit is not what stops guessing;
 * it keeps one source from spending the server's time and the log on refusals. The per-id limit means an
 * attacker can keep a device that is offline from logging in for a window; a device that is online is not
 * touched (one live session per device, see the broker).
 */
export function createLoginGuard(options: LoginGuardOptions = {}): LoginGuard {
  const perSource = options.maxFailuresPerSource ?? 20;
  const perId = options.maxFailuresPerId ?? 10;
  const windowMs = options.windowMs ?? 60_000;
  const maxEntries = options.maxEntries ?? 10_000;
  const clock = options.clock ?? { now: () => new Date() };
  const sources = new Map<string, Window>();
  const ids = new Map<string, Window>();

  function current(table: Map<string, Window>, key: string, nowMs: number): Window | undefined {
    const w = table.get(key);
    if (w && nowMs - w.startMs >= windowMs) {
      table.delete(key);
      return undefined;
    }
    return w;
  }

  function count(table: Map<string, Window>, key: string, nowMs: number): void {
    const w = current(table, key, nowMs);
    if (w) {
      w.failures += 1;
      return;
    }
    if (table.size >= maxEntries) table.delete(table.keys().next().value as string);
    table.set(key, { startMs: nowMs, failures: 1 });
  }

  return {
    attempt: function loginAttempt(deviceId, source) {
      const nowMs = clock.now().getTime();
      if ((current(sources, source, nowMs)?.failures ?? 0) >= perSource) return 'source-limited';
      if ((current(ids, deviceId, nowMs)?.failures ?? 0) >= perId) return 'id-limited';
      count(ids, deviceId, nowMs);
      return null;
    },
    failed: function loginFailed(_deviceId, source) {
      count(sources, source, clock.now().getTime());
    },
    succeeded: function loginSucceeded(deviceId, source) {
      sources.delete(source);
      const w = ids.get(deviceId);
      if (w && w.failures > 0) w.failures -= 1;
    },
  };
}
