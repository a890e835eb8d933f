import { createHash } from 'node:crypto';
import type { EventBody } from '../src/protocol/messages.js';
import { taskOf, type Release } from '../src/protocol/release.js';
import { verifyRelease } from '../src/protocol/verify-release.js';
import type { AgentClock } from './clock.js';
import type { ProfileDriver, ProfileTarget } from './driver.js';
import type { ReleaseStore } from './release-store.js';
import { switchProfile } from './switcher.js';
import { WeightsMismatchError, releaseWeights, type WeightsCache } from './weights-cache.js';

export interface RunnerDeps {
  driver: ProfileDriver;
  clock: AgentClock;
  cache: WeightsCache;
  releases: ReleaseStore;
  deviceId: string;
  deviceClassId: string;
  emit(body: EventBody): void;
  /** Something in the state message changed. */
  changed(): void;
  log(line: string): void;
}

export interface RunnerView {
  release: Release | null;
  activeTask: string | null;
  running: ProfileTarget | null;
  moving: boolean;
  pending: { releaseId: string; version: number; reason: string } | null;
  refused: { releaseId: string | null; reason: string } | null;
  /** Signature digest of the applied release. */
  digest: string | null;
}

/**
 * What a task switch did: switched (or was already running it), or why not. A domain result: the control
 * endpoint (control-server.ts) decides what it means in HTTP.
 */
export type TaskResult =
  | { ok: true; task: string; unchanged?: true; overheadMs: number; actuationMs: number; toolMs?: number }
  | { ok: false; code: 'no-release-applied' | 'unknown-task'; error: string }
  | { ok: false; code: 'switch-failed'; task: string; step: string; error: string; restored: boolean };

interface Pending {
  release: Release;
  raw: unknown;
  digest: string;
  signerPem: string;
  ready: boolean;
  reason: string;
  deferReported: boolean;
  mismatchReported: boolean;
  retryMs: number;
}

/** Longest pause between two tries to fetch a release's weights. */
const MAX_RETRY_MS = 5 * 60_000;

export const clip = (text: string, max: number) => (text.length <= max ? text : `${text.slice(0, max - 1)}…`);

/**
 * What the device runs and why. Releases are verified, their weights fetched, then applied as one
 * switch; tasks switch within the applied release. Every change of the driver goes through one queue,
 * so switches never overlap.
 *
 * Which release runs: the device runs the release currently assigned to it (the retained message on
 * its release topic) once it verifies — signature by the trusted key (or one a key rotation reaches),
 * schema, device class, audience, expiry — its sequence is not below the highest one applied, and its
 * weights are present and match. Older content comes back only as a new release with a higher
 * sequence (a re-issue). Releases are told apart by their signature digest: the same digest again is a
 * duplicate and changes nothing; the same sequence with another digest is refused. A release refused
 * for what it is (verification, sequence, a failed switch) is remembered by digest until the agent
 * restarts; weights that do not match are fetched again later, never remembered as a refusal.
 */
export function createProfileRunner(deps: RunnerDeps) {
  const { driver, clock, cache } = deps;
  let applied: { release: Release; raw: unknown; digest: string } | null = null;
  let activeTask: string | null = null;
  let running: ProfileTarget | null = null;
  let moving = false;
  let pending: Pending | null = null;
  let refused: RunnerView['refused'] = null;
  const refusedContent = new Set<string>();
  let queue: Promise<unknown> = Promise.resolve();
  let retryTimer: NodeJS.Timeout | null = null;

  function exclusive<T>(fn: () => Promise<T>): Promise<T> {
    const next = queue.then(fn);
    queue = next.catch(() => {});
    return next;
  }

  function target(release: Release, taskName: string): ProfileTarget {
    const task = taskOf(release, taskName)!;
    return { releaseId: release.id, taskName, task, deviceClass: release.deviceClass, weightsPath: cache.pathOf(task.model.sha256) };
  }

  function refuse(releaseId: string | null, reason: string, contentKey?: string) {
    refused = { releaseId, reason: clip(reason, 2000) };
    if (contentKey) refusedContent.add(contentKey);
    deps.emit({ type: 'release-refused', releaseId, reason: clip(reason, 2000) });
    deps.log(`agent: refused release ${releaseId ?? '(unreadable)'}: ${reason}`);
    deps.changed();
  }

  function retryLater(p: Pending, why: string) {
    p.reason = clip(`${why}; retrying in ${Math.round(p.retryMs / 1000)} s`, 500);
    deps.changed();
    retryTimer = setTimeout(() => void prepare(p), p.retryMs);
    retryTimer.unref?.();
    p.retryMs = Math.min(p.retryMs * 2, MAX_RETRY_MS);
  }

  function switched(from: string | null, to: ProfileTarget, reason: 'local' | 'command' | 'release' | 'startup', overheadMs: number, actuationMs: number) {
    deps.emit({
      type: 'task-switched', fromTask: from, toTask: to.taskName, profileId: to.task.profileId, profileRevision: to.task.revision,
      releaseId: to.releaseId, reason, overheadMs, actuationMs,
    });
  }

  async function prepare(p: Pending): Promise<void> {
    try {
      await cache.ensure(p.release);
    } catch (e) {
      if (pending !== p) return;
      if (e instanceof WeightsMismatchError) {
        // The server may have sent the wrong file (or an old one by a path): report it once and fetch again later.
        if (!p.mismatchReported) {
          p.mismatchReported = true;
          refused = { releaseId: p.release.id, reason: clip(e.message, 2000) };
          deps.emit({ type: 'release-refused', releaseId: p.release.id, reason: clip(`${e.message}; will fetch again`, 2000) });
          deps.log(`agent: weights of release ${p.release.id} do not match: ${e.message}; will fetch again`);
        }
        return retryLater(p, `weights do not match the release (${e.message})`);
      }
      return retryLater(p, `waiting for weights (${(e as Error).message})`);
    }
    if (pending !== p) return;
    if (p.mismatchReported && refused?.releaseId === p.release.id) refused = null;
    p.ready = true;
    await applyPending();
  }

  async function applyPending(): Promise<void> {
    const p = pending;
    if (!p || !p.ready) return;
    if (p.release.applyPolicy === 'when-idle' && moving) {
      p.reason = 'waiting for the robot to stop moving (applyPolicy when-idle)';
      if (!p.deferReported) deps.emit({ type: 'release-deferred', releaseId: p.release.id, version: p.release.version, reason: p.reason });
      p.deferReported = true;
      return deps.changed();
    }
    await exclusive(async () => {
      if (pending !== p || (p.release.applyPolicy === 'when-idle' && moving)) return;
      const taskName = activeTask !== null && taskOf(p.release, activeTask) ? activeTask : p.release.defaultTask;
      const to = target(p.release, taskName);
      const t0 = clock.monotonicMs();
      const outcome = await switchProfile(driver, running, to, clock);
      const overheadMs = Math.max(0, clock.monotonicMs() - t0 - outcome.actuationMs);
      pending = null;
      if (!outcome.ok) {
        deps.emit({ type: 'switch-failed', toTask: taskName, step: outcome.step, error: clip(outcome.error, 2000), restored: outcome.restored });
        const back = outcome.restored ? 'the previous profile was restored' : 'the previous profile could not be restored';
        return refuse(p.release.id, `switch to task ${taskName} failed at ${outcome.step}: ${outcome.error}; ${back}`, p.digest);
      }
      const fromTask = running ? activeTask : null;
      applied = { release: p.release, raw: p.raw, digest: p.digest };
      activeTask = taskName;
      running = to;
      deps.emit({ type: 'release-applied', releaseId: p.release.id, version: p.release.version });
      switched(fromTask, to, 'release', overheadMs, outcome.actuationMs);
      deps.changed();
      await deps.releases
        .saveRelease(p.raw, { version: p.release.version, digest: p.digest, releaseId: p.release.id, signerPem: p.signerPem }, taskName)
        .catch((e: unknown) => deps.log(`agent: could not save release yet: ${(e as Error).message}`));
      // Keep what runs now and what a newer release (arrived meanwhile) is fetching or waiting with.
      const newer = pending as Pending | null; // may have been set while the release was being saved
      const keep = [p.release, ...(newer ? [newer.release] : [])].flatMap((r) => releaseWeights(r).map((m) => m.sha256));
      try {
        cache.evict(new Set(keep));
      } catch (e) {
        deps.log(`agent: could not trim the weights cache: ${(e as Error).message}`);
      }
    });
  }

  function keyOf(raw: unknown): string {
    return createHash('sha256').update(JSON.stringify(raw)).digest('hex');
  }

  /** Why a verified release cannot run here, judged by its sequence against what was applied; null when it may. */
  function sequenceRefusal(release: Release, digest: string): string | null {
    const floor = deps.releases.floor();
    const highest = Math.max(floor?.version ?? 0, applied?.release.version ?? 0);
    if (release.version < highest) {
      return `older-sequence: release ${release.id} has sequence ${release.version}, below the ${highest} this device applied (${floor?.releaseId ?? applied?.release.id}); a rollback must be a new release`;
    }
    const sameSeqDigest = floor?.version === release.version ? floor.digest : applied?.release.version === release.version ? applied.digest : null;
    if (sameSeqDigest !== null && sameSeqDigest !== digest) {
      return `sequence-reused: release ${release.id} has sequence ${release.version} but other content than the release applied with that sequence (signature digest ${digest.slice(0, 16)}…, applied ${sameSeqDigest.slice(0, 16)}…)`;
    }
    return null;
  }

  return {
    /** Start-up: re-verify the release on disk and run the last active task's whole profile. */
    restore: async function restore(): Promise<void> {
      const saved = deps.releases.load();
      if (!saved) return;
      // The release on disk was accepted when it arrived: its expiry and its signer's later replacement do not stop it now.
      const verdict = verifyRelease(saved.signed, deps.releases.trustedKeys(), deps.deviceClassId, { deviceId: deps.deviceId, acceptEarlierKeys: true });
      if (!verdict.ok) return refuse(verdict.releaseId, `the release stored on this device no longer verifies (${verdict.reason}: ${verdict.detail})`);
      const unfit = driver.checkRelease?.(verdict.release);
      if (unfit) return refuse(verdict.release.id, `the release stored on this device does not fit its hardware (${driver.name}): ${unfit}`);
      applied = { release: verdict.release, raw: saved.signed, digest: verdict.digest };
      const taskName = saved.activeTask !== null && taskOf(verdict.release, saved.activeTask) ? saved.activeTask : verdict.release.defaultTask;
      activeTask = taskName;
      const missing = releaseWeights(verdict.release).filter((m) => !cache.has(m.sha256));
      if (missing.length > 0) {
        deps.log(`agent: weights of the stored release are missing (${missing.map((m) => m.id).join(', ')}); waiting for the release to arrive again`);
        return;
      }
      await exclusive(async () => {
        const to = target(verdict.release, taskName);
        const t0 = clock.monotonicMs();
        const outcome = await switchProfile(driver, null, to, clock);
        const overheadMs = Math.max(0, clock.monotonicMs() - t0 - outcome.actuationMs);
        if (outcome.ok) {
          running = to;
          switched(null, to, 'startup', overheadMs, outcome.actuationMs);
        } else {
          deps.emit({ type: 'switch-failed', toTask: taskName, step: outcome.step, error: clip(outcome.error, 2000), restored: false });
        }
        deps.changed();
      });
    },

    /** A payload on the release topic that could not even be read (too large, not JSON). */
    refuseUnreadable: function refuseUnreadable(detail: string): void {
      refuse(null, detail);
    },

    /** A payload from the release topic (already JSON-parsed). */
    offerRelease: async function offerRelease(raw: unknown): Promise<void> {
      const contentKey = keyOf(raw);
      if (refusedContent.has(contentKey)) return;
      const verdict = verifyRelease(raw, deps.releases.trustedKeys(), deps.deviceClassId, { deviceId: deps.deviceId, nowMs: clock.now() });
      if (!verdict.ok) return refuse(verdict.releaseId, `${verdict.reason}: ${verdict.detail}`, contentKey);
      const { release, digest } = verdict;
      // A redelivery of what runs or waits (retained message, reconnect): the same signature, nothing to do.
      if (applied?.digest === digest && running) {
        if (pending) (pending = null), deps.changed();
        return;
      }
      if (pending?.digest === digest) return;
      if (refusedContent.has(digest)) return;
      if (!taskOf(release, release.defaultTask)) {
        return refuse(release.id, `defaultTask ${release.defaultTask} is not one of the release's tasks`, digest);
      }
      const unfit = driver.checkRelease?.(release);
      if (unfit) return refuse(release.id, `this device cannot run it (${driver.name}): ${unfit}`, digest);
      const bySequence = sequenceRefusal(release, digest);
      if (bySequence) return refuse(release.id, bySequence, digest);
      if (retryTimer) clearTimeout(retryTimer);
      pending = {
        release, raw, digest, signerPem: verdict.signerPem, ready: false, reason: 'downloading weights',
        deferReported: false, mismatchReported: false, retryMs: 1000,
      };
      deps.changed();
      await prepare(pending);
    },

    /** `report`: an unknown task name also becomes a switch-failed event (commands and robot topics have no reply to carry it). */
    setTask: function setTask(task: string, reason: 'local' | 'command', report = reason === 'command'): Promise<TaskResult> {
      return exclusive(async (): Promise<TaskResult> => {
        const t0 = clock.monotonicMs();
        if (!applied) return { ok: false, code: 'no-release-applied', error: 'no release is applied yet, so there is no task to switch to' };
        if (!taskOf(applied.release, task)) {
          const error = `task ${task} is not in release ${applied.release.id}; it has: ${Object.keys(applied.release.tasks).join(', ')}`;
          if (report) deps.emit({ type: 'switch-failed', toTask: clip(task, 64), step: 'select-task', error, restored: true });
          return { ok: false, code: 'unknown-task', error };
        }
        if (task === activeTask && running?.taskName === task) return { ok: true, task, unchanged: true, overheadMs: 0, actuationMs: 0 };
        const to = target(applied.release, task);
        const outcome = await switchProfile(driver, running, to, clock);
        const overheadMs = Math.max(0, clock.monotonicMs() - t0 - outcome.actuationMs);
        if (!outcome.ok) {
          deps.emit({ type: 'switch-failed', toTask: task, step: outcome.step, error: clip(outcome.error, 2000), restored: outcome.restored });
          deps.changed();
          return { ok: false, code: 'switch-failed', task, step: outcome.step, error: outcome.error, restored: outcome.restored };
        }
        const fromTask = activeTask;
        activeTask = task;
        running = to;
        switched(fromTask, to, reason, overheadMs, outcome.actuationMs);
        const saved = deps.releases.saveTask(applied.release.id, task);
        deps.changed();
        // The answer waits for the task to be on disk (a restart resumes the task the caller was told of); the
        // overhead above is the switch's own, without this bookkeeping.
        await saved;
        return { ok: true, task, overheadMs, actuationMs: outcome.actuationMs, toolMs: outcome.toolMs };
      });
    },

    setMotion: function setMotion(value: boolean): void {
      if (value === moving) return;
      moving = value;
      deps.emit({ type: 'motion', moving });
      deps.changed();
      if (!moving) void applyPending();
    },

    view: function view(): RunnerView {
      return {
        release: applied?.release ?? null,
        activeTask,
        running,
        moving,
        pending: pending ? { releaseId: pending.release.id, version: pending.release.version, reason: clip(pending.reason, 500) } : null,
        refused,
        digest: applied?.digest ?? null,
      };
    },

    /** Resolves when every queued switch has finished. */
    idle: () => queue.then(() => undefined),
    close: function close() {
      if (retryTimer) clearTimeout(retryTimer);
    },
  };
}

export type ProfileRunner = ReturnType<typeof createProfileRunner>;
