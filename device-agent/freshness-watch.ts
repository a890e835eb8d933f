import { join } from 'node:path';
import { freshnessOf, verifyFreshness, type FreshnessStatement } from '../src/protocol/freshness.js';
import type { StateMessage } from '../src/protocol/messages.js';
import { readJsonIfExists, writeFileAtomic } from './atomic-file.js';
import type { AgentClock } from './clock.js';

export type FreshnessReport = NonNullable<StateMessage['freshness']>;

/** The newest release the device knows: applied, or received and waiting to apply. */
export type KnownRelease = { version: number; digest: string | null } | null;

export type FreshnessOffer = { kind: 'accepted' } | { kind: 'older'; detail: string } | { kind: 'refused'; detail: string };

export interface FreshnessWatch {
  /** A statement from the class's freshness topic: kept when valid and not older than the one held. */
  offer(input: unknown): FreshnessOffer;
  /** What the statement held says now about the known release; null before any statement. */
  report(known: KnownRelease): FreshnessReport | null;
  close(): void;
}

export interface FreshnessWatchOptions {
  dir: string;
  deviceClassId: string;
  /** The keys the device trusts now (its configured key and those it followed through rotations). */
  trustedKeys(): readonly string[];
  clock: AgentClock;
  /** Called when what report() says may have changed: a statement kept, or the held one expiring. */
  changed(): void;
  log?: (line: string) => void;
}

/** setTimeout's longest delay (2^31 − 1 ms, about 24.8 days); a later expiry is re-armed from there. */
const MAX_TIMER_MS = 2 ** 31 - 1;

/**
 * The agent's reading of the server's freshness statements. Each is verified like a release (signing key or
 * its rotation chain, device class); one issued before the statement held is a replay and is ignored. The
 * statement held is kept in `freshness.json` (as received, verified again on start), so a replay is spotted
 * after a restart too. It only ever names a release: nothing is fetched or applied because of it.
 */
export function createFreshnessWatch(options: FreshnessWatchOptions): FreshnessWatch {
  const log = options.log ?? (() => {});
  const path = join(options.dir, 'freshness.json');
  let held: FreshnessStatement | null = null;
  let timer: NodeJS.Timeout | null = null;
  let closed = false;
  let writing: Promise<void> = Promise.resolve();

  function armExpiry() {
    if (timer) clearTimeout(timer);
    timer = null;
    if (!held || closed) return;
    const leftMs = Date.parse(held.expiresAt) - options.clock.now();
    if (leftMs < 0) return;
    timer = setTimeout(() => {
      timer = null;
      if (Date.parse(held!.expiresAt) > options.clock.now()) return armExpiry();
      options.changed();
    }, Math.min(MAX_TIMER_MS, leftMs + 1));
    timer.unref?.();
  }

  try {
    const stored = readJsonIfExists(path);
    if (stored !== null) {
      const v = verifyFreshness(stored, options.trustedKeys(), options.deviceClassId);
      if (v.ok) held = v.statement;
      else log(`agent: ignored the stored freshness statement (${v.reason}: ${v.detail})`);
    }
  } catch (e) {
    log(`agent: could not read ${path} (${(e as Error).message})`);
  }
  armExpiry();

  return {
    offer: function offer(input) {
      const v = verifyFreshness(input, options.trustedKeys(), options.deviceClassId);
      if (!v.ok) return { kind: 'refused', detail: `${v.reason}: ${v.detail}` };
      if (held && Date.parse(v.statement.issuedAt) < Date.parse(held.issuedAt)) {
        return { kind: 'older', detail: `issued at ${v.statement.issuedAt}, before the statement held (${held.issuedAt})` };
      }
      held = v.statement;
      armExpiry();
      // Behind the change: the statement held is what counts; a failed write only loses replay protection across a restart.
      const text = JSON.stringify(input);
      writing = writing
        .then(() => writeFileAtomic(path, text))
        .catch((e: unknown) => log(`agent: could not keep the freshness statement (${(e as Error).message})`));
      return { kind: 'accepted' };
    },
    report: function report(known) {
      if (!held) return null;
      const f = freshnessOf(held, known, options.clock.now());
      return {
        latestReleaseId: held.latest?.releaseId ?? null,
        latestVersion: held.latest?.version ?? null,
        latestDigest: held.latest?.digest ?? null,
        issuedAt: held.issuedAt,
        expiresAt: held.expiresAt,
        stale: f.stale,
        expired: f.expired,
      };
    },
    close: function close() {
      closed = true;
      if (timer) clearTimeout(timer);
      timer = null;
    },
  };
}
