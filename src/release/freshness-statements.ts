import { FRESHNESS_FORMAT, type FreshnessPublisher, type FreshnessStatement } from '../protocol/freshness.js';
import { signatureDigest } from '../protocol/verify-release.js';
import type { ReleaseRepository } from '../store/releases.js';
import type { Signer } from './signer.js';

/**
 * Each statement is signed again every hour and holds for a day. The day follows the timestamp role of the
 * open update-security specifications, whose reference implementation gives timestamp metadata a one-day
 * expiry by default (from memory); the hour gives 24 fresh statements in each lifetime, so a server restart
 * or a robot out of reach of the broker for a few hours is not flagged, while a day without any word is.
 */
export const FRESHNESS_PERIOD_MS = 60 * 60 * 1000;
export const FRESHNESS_LIFETIME_MS = 24 * 60 * 60 * 1000;
/** How often the newest releases are looked at, so a new release is named within a minute rather than an hour. */
export const FRESHNESS_CHECK_MS = 60 * 1000;

export interface FreshnessServiceOptions {
  releases: Pick<ReleaseRepository, 'latestByClass'>;
  signer: Pick<Signer, 'signFreshness'>;
  publisher: FreshnessPublisher;
  clock: { now(): Date };
  periodMs?: number;
  lifetimeMs?: number;
  checkEveryMs?: number;
  log?: (line: string) => void;
}

export interface FreshnessService {
  /** Signs and publishes the statement of every class whose newest release changed or whose last statement is a period old; returns how many. */
  refresh(): Promise<number>;
  /** The statement last published for a class (for tests and the log), or null. */
  last(deviceClassId: string): FreshnessStatement | null;
  /** Publishes at once, then checks every checkEveryMs. */
  start(): void;
  stop(): Promise<void>;
}

/**
 * The server's periodically re-signed freshness statements, one per device class that has a release: the
 * class's newest release by id, sequence and signature digest, when it was said and until when it holds.
 * Published retained, so a device reads the latest on connecting. Signing uses the release key and its
 * rotation chain (the signer's), so devices verify it as they verify releases.
 */
export function createFreshnessService(options: FreshnessServiceOptions): FreshnessService {
  const periodMs = options.periodMs ?? FRESHNESS_PERIOD_MS;
  const lifetimeMs = options.lifetimeMs ?? FRESHNESS_LIFETIME_MS;
  const checkEveryMs = options.checkEveryMs ?? FRESHNESS_CHECK_MS;
  const log = options.log ?? (() => {});
  const published = new Map<string, FreshnessStatement>();
  let timer: NodeJS.Timeout | null = null;
  let running: Promise<number> | null = null;

  async function refreshOnce(): Promise<number> {
    let count = 0;
    for (const record of options.releases.latestByClass()) {
      const nowMs = options.clock.now().getTime();
      const before = published.get(record.deviceClassId);
      const digest = signatureDigest(record.parsed.signature);
      const due = !before || before.latest?.digest !== digest || nowMs - Date.parse(before.issuedAt) >= periodMs;
      if (!due) continue;
      // issuedAt strictly increases per class: a device ignores a statement older than the one it holds.
      const issuedMs = before ? Math.max(nowMs, Date.parse(before.issuedAt) + 1) : nowMs;
      const statement: FreshnessStatement = {
        format: FRESHNESS_FORMAT,
        deviceClassId: record.deviceClassId,
        latest: { releaseId: record.id, version: record.version, digest },
        issuedAt: new Date(issuedMs).toISOString(),
        expiresAt: new Date(issuedMs + lifetimeMs).toISOString(),
      };
      try {
        await options.publisher.publishFreshness(record.deviceClassId, JSON.stringify(options.signer.signFreshness(statement)));
        published.set(record.deviceClassId, statement);
        count += 1;
      } catch (e) {
        log(`freshness: could not publish the statement of ${record.deviceClassId} (${(e as Error).message}); tried again in ${checkEveryMs} ms`);
      }
    }
    return count;
  }

  function refresh(): Promise<number> {
    running ??= refreshOnce().finally(() => (running = null));
    return running;
  }

  return {
    refresh,
    last: (deviceClassId) => published.get(deviceClassId) ?? null,
    start: function start() {
      if (timer) return;
      const tick = () => void refresh().catch((e: unknown) => log(`freshness: ${(e as Error).message}`));
      tick();
      timer = setInterval(tick, checkEveryMs);
      timer.unref?.();
    },
    stop: async function stop() {
      if (timer) clearInterval(timer);
      timer = null;
      await running?.catch(() => undefined);
    },
  };
}
