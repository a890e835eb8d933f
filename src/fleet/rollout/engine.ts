import { releaseSchema, type Release } from '../../protocol/release.js';
import type { RolloutDeviceRecord, RolloutRecord } from '../../store/rollouts.js';
import type { Store } from '../../store/store.js';
import type { ReleasePublisher } from '../../protocol/release.js';
import type { CalibrationEngine } from '../calibration/engine.js';
import { createAssignmentDispatcher } from './dispatch.js';
import { createFactsReader } from './facts.js';
import { clockDelaysMs, judgeSteps, waveOutcome } from './gate.js';
import { createPassPacer, type PassRequest, type PassResult } from './pacing.js';
import { systemScheduler, type Scheduler } from './scheduler.js';
import type { RolloutSpec } from './spec.js';

/** The actor of changes the engine makes on its own (wave starts, gate pauses, completion). */
export const ENGINE_ACTOR = 'fleet engine';

export interface RolloutEngineOptions {
  /** How often the engine looks at every moving rollout, in ms (200 by default). */
  tickMs?: number;
  /** How many assignments one transaction records (100 by default); each batch is sent as soon as it is recorded. */
  assignConcurrency?: number;
  /** Sends the broker has not acknowledged yet above which the engine waits before recording more (2,000 by default). */
  maxSendsInFlight?: number;
  log?: (line: string) => void;
  /** The timers passes run on (the system's by default; tests advance their own). */
  scheduler?: Scheduler;
}

export interface RolloutEngineDeps extends RolloutEngineOptions {
  store: Store;
  /** Sends releases over the bus; without it assignments are recorded only (devices get them on the bus's next start). */
  publisher: ReleasePublisher | undefined;
  clock: { now(): Date };
  /** The class calibrations the latency gate applies (src/fleet/calibration/engine.ts keeps them current). */
  calibration: Pick<CalibrationEngine, 'latencyFactor'>;
  /**
   * Subscribes to the bus's "devices stored" notices (the bridge's `onStored`); returns the unsubscribe. With it,
   * a device's report is judged as soon as it is stored instead of on the next tick, and passes over every open
   * device are needed only for the clock's verdicts (src/fleet/rollout/pacing.ts).
   */
  onDevicesStored?: (listener: (deviceIds: string[]) => void) => () => void;
  /**
   * True while this server may act on rollouts (it holds the leader lock, src/fleet/leader-lock.ts); asked before
   * every pass and every assignment batch, so a replica that lost the lock stops at once. Always true by default.
   */
  fence?: () => boolean;
}

export interface RolloutEngine {
  /** Starts the timer (and listens for reports). Rollouts left running or rolling back by an earlier process carry on from their stored state. */
  start(): void;
  /** Stops the timer and waits for a pass in progress and the sends it started. */
  stop(): Promise<void>;
  /** Runs one pass over every open device now (after the one in progress, if any); resolves once its sends have their outcome. */
  tick(): Promise<void>;
}

/** Which devices of a wave a pass judges: every open one, those the clock may have moved, or those that reported. */
type Scope = { kind: 'all' } | { kind: 'due' } | { kind: 'reported'; deviceIds: ReadonlySet<string> };

/** A rollout's state as far as judging its whole wave goes: a new wave, a resume or a pause changes it. */
const wholeKey = (r: RolloutRecord) => `${r.currentWave}|${r.waveStartedAt}|${r.updatedAt}`;

/**
 * Advances rollouts from the database alone, so a restarted server continues where the last one stopped.
 * Each pass judges the devices of the current wave (src/fleet/rollout/gate.ts) from their stored state and
 * events, assigns the ones that may go (src/fleet/rollout/dispatch.ts: one transaction per batch, each
 * assignment with the rollout's mark), pauses on a failed gate, and opens the next wave when the current
 * one passed. Passes run on a timer and, given `onDevicesStored`, as soon as devices report
 * (src/fleet/rollout/pacing.ts).
 */
export function createRolloutEngine(deps: RolloutEngineDeps): RolloutEngine {
  const { store, publisher, clock } = deps;
  const log = deps.log ?? (() => {});
  const tickMs = deps.tickMs ?? 200;
  // Busy and waited time are counted on the timers' own clock, the one the pacer's rests are measured against:
  // mixing in the process's clock would let a slow pass (a loaded machine) push the next timer pass past
  // ticks that a scheduler advanced by hand never reaches.
  const scheduler = deps.scheduler ?? systemScheduler;
  const fence = deps.fence ?? (() => true);
  const repo = store.rollouts;
  const facts = createFactsReader(store.rolloutFacts);
  const ranges = store.eventRanges;
  const dispatcher = createAssignmentDispatcher({
    store,
    publisher,
    repo,
    ranges,
    batchSize: deps.assignConcurrency ?? 100,
    fence,
    maxSendsInFlight: deps.maxSendsInFlight ?? 2000,
    log,
    nowMs: () => scheduler.nowMs(),
  });
  const releases = new Map<string, Release>();
  let unsubscribe: (() => void) | null = null;
  const reportsWake = deps.onDevicesStored !== undefined;
  // Per running rollout: its state when a pass last judged its whole wave (see pass()).
  const judgedWhole = new Map<string, string>();
  // Per wave ("rollout|wave"): how many devices the last count left open, less those settled since.
  const openHint = new Map<string, number>();
  // Set by a pass that opened a rollout's next wave.
  let waveOpened = false;

  function releaseOf(id: string): Release {
    let r = releases.get(id);
    if (!r) {
      const stored = store.releases.get(id);
      if (!stored) throw new Error(`release '${id}' of a rollout is not stored`);
      r = stored.parsed.release;
      releases.set(id, r);
    }
    return r;
  }

  function audit(r: RolloutRecord, action: string, at: string, detail: unknown) {
    store.audit.record({ at, actor: ENGINE_ACTOR, action, target: `rollout/${r.id}`, detail });
  }

  /**
   * One pass over a running rollout's current wave, judging the devices `scope` names: all open ones, those
   * the clock may have moved, or those that reported. Returns the ms it waited on the bus.
   */
  async function advance(r: RolloutRecord, nowMs: number, scope: Scope): Promise<number> {
    const at = new Date(nowMs).toISOString();
    if (r.waveStartedAt === null) {
      repo.startWave(r.id, r.currentWave, at);
      // Audit details number waves from 1, as the API and the console do.
      audit(r, 'rollout.wave-start', at, { wave: r.currentWave + 1 });
      r = repo.get(r.id)!;
    }
    const spec = r.spec as RolloutSpec;
    const release = releaseOf(r.releaseId);
    // The class's calibration reads many events: only a gate that checks latency needs it.
    const ctx = { gate: spec.gate, offline: spec.offline, latencyFactor: spec.gate.telemetryFrames > 0 ? deps.calibration.latencyFactor(r.deviceClassId) : 1 };
    const waveStartMs = Date.parse(r.waveStartedAt!);
    const waveKey = `${r.id}|${r.currentWave}`;
    const toAssign: RolloutDeviceRecord[] = [];
    let settled = 0;
    let failed = 0;
    store.transaction(() => {
      const w = { rolloutId: r.id, wave: r.currentWave, release, nowMs, waveStartMs, needTelemetry: spec.gate.telemetryFrames > 0 };
      const delays = clockDelaysMs(ctx);
      const open =
        scope.kind === 'reported'
          ? facts.openDevices(w, scope.deviceIds)
          : scope.kind === 'due'
            ? facts.dueDevices(w, { assignedBy: new Date(nowMs - delays.assignedMs).toISOString(), appliedBy: new Date(nowMs - delays.appliedMs).toISOString() })
            : facts.openWave(w);
      for (const { device: d, facts: f } of open) {
        const verdict = judgeSteps(f, ctx);
        if (verdict.action === 'assign') toAssign.push(d);
        if (verdict.action !== 'set') continue;
        for (const step of verdict.steps) repo.setDeviceStatus(r.id, d.deviceId, step.status, step.reason, at);
        const last = verdict.steps[verdict.steps.length - 1]!.status;
        if (last === 'failed') failed += 1;
        else if (last === 'passed' || last === 'skipped') settled += 1;
      }
    });
    if (scope.kind === 'all') judgedWhole.set(r.id, wholeKey(r));
    const sent = await dispatcher.dispatch(r, toAssign, false, at);
    const waitedMs = sent.waitedMs;
    failed += sent.failed;
    // The lock may have gone while the sends were awaited: the wave is closed by whoever holds it now.
    if (!fence()) return waitedMs;
    // The wave's counts are read when it may have closed: always on a timer pass; on a short pass when a device
    // failed or the devices left open by the last count may all have settled.
    const hint = openHint.get(waveKey);
    if (hint !== undefined) openHint.set(waveKey, hint - settled);
    if (scope.kind === 'reported' && failed === 0 && hint !== undefined && hint - settled > 0) return waitedMs;
    const counts = repo.waveCounts(r.id, r.currentWave);
    openHint.set(waveKey, (counts.waiting ?? 0) + (counts.assigned ?? 0) + (counts.applied ?? 0));
    const outcome = waveOutcome(counts);
    if (outcome === 'open') return waitedMs;
    store.transaction(() => {
      const current = repo.get(r.id);
      // An operator may have paused or aborted it while this pass awaited the bus.
      if (!current || current.status !== 'running' || current.currentWave !== r.currentWave) return;
      if (outcome === 'failed') {
        const failures = repo.devices(r.id, r.currentWave).filter((d) => d.status === 'failed').map((d) => ({ deviceId: d.deviceId, reason: d.reason ?? 'failed' }));
        const reason = { kind: 'gate', wave: r.currentWave, at, failures };
        repo.setStatus(r.id, 'paused', at, reason);
        audit(r, 'rollout.pause', at, { ...reason, wave: r.currentWave + 1 });
        log(`rollout ${r.id}: wave ${r.currentWave + 1} failed its gate (${failures.map((f) => f.deviceId).join(', ')}); paused`);
      } else if (r.currentWave + 1 < r.waveCount) {
        repo.startWave(r.id, r.currentWave + 1, at);
        audit(r, 'rollout.wave-start', at, { wave: r.currentWave + 2, previousWavePassed: r.currentWave + 1 });
        waveOpened = true;
      } else {
        repo.setStatus(r.id, 'completed', at);
        audit(r, 'rollout.complete', at, { waves: r.waveCount });
      }
    });
    return waitedMs;
  }

  /** One pass over a rollout rolling back. Returns the ms it waited on the bus. */
  async function rollBack(r: RolloutRecord, nowMs: number): Promise<number> {
    const at = new Date(nowMs).toISOString();
    const moved = repo.devices(r.id).filter((d) => d.assignmentId !== null);
    const toRestore: RolloutDeviceRecord[] = [];
    store.transaction(() => {
      for (const d of moved) {
        if (d.rollbackStatus === null && d.previousReleaseId === null) repo.markRollback(r.id, d.deviceId, 'nothing-to-restore', null);
        else if (d.rollbackStatus === null) toRestore.push(d);
        else if (d.rollbackStatus === 'assigned' && facts.reported(d.deviceId)?.releaseId === (d.restoreReleaseId ?? d.previousReleaseId)) {
          repo.setRollbackStatus(r.id, d.deviceId, 'restored');
        }
      }
    });
    const { waitedMs } = await dispatcher.dispatch(r, toRestore, true, at);
    if (!fence()) return waitedMs;
    const after = repo.devices(r.id).filter((d) => d.assignmentId !== null);
    if (after.every((d) => d.rollbackStatus === 'restored' || d.rollbackStatus === 'nothing-to-restore')) {
      store.transaction(() => {
        if (repo.get(r.id)?.status !== 'rolling-back') return;
        repo.setStatus(r.id, 'rolled-back', at);
        audit(r, 'rollout.rolled-back', at, {
          restored: after.filter((d) => d.rollbackStatus === 'restored').length,
          nothingToRestore: after.filter((d) => d.rollbackStatus === 'nothing-to-restore').map((d) => d.deviceId),
        });
      });
    }
    return waitedMs;
  }

  /**
   * One pass over every moving rollout. A short pass (devices reported) judges just those devices and leaves
   * rollbacks to the others. A timer pass judges a rollout's whole wave the first time it sees the rollout in
   * its current state (just started, resumed, next wave, or a restarted server) and, when reports wake the
   * engine, afterwards only the devices the clock may have moved. An explicit pass judges everything.
   */
  async function pass(request: PassRequest): Promise<PassResult> {
    const begun = scheduler.nowMs();
    let waitedMs = 0;
    waveOpened = false;
    const nowMs = clock.now().getTime();
    if (!fence()) return { busyMs: 0, moving: false, fullPassNow: false };
    const moving = repo.moving();
    if (request.kind !== 'reported') forgetAllBut(moving);
    for (const r of moving) {
      if (!fence()) break;
      try {
        if (r.status === 'running') {
          const scope: Scope =
            request.kind === 'reported'
              ? request
              : request.kind === 'timer' && reportsWake && judgedWhole.get(r.id) === wholeKey(r)
                ? { kind: 'due' }
                : { kind: 'all' };
          waitedMs += await advance(r, nowMs, scope);
        } else if (request.kind !== 'reported') waitedMs += await rollBack(r, nowMs);
      } catch (e) {
        log(`rollout ${r.id}: pass failed: ${e instanceof Error ? e.message : String(e)}`);
      }
    }
    // A wave opened by this pass has its devices assigned by a timer pass right after, not at the timer's next turn.
    return { busyMs: Math.max(0, scheduler.nowMs() - begun - waitedMs), moving: moving.length > 0, fullPassNow: waveOpened };
  }

  /** Drops what the engine remembers of rollouts that stopped moving. */
  function forgetAllBut(moving: readonly RolloutRecord[]) {
    const ids = new Set(moving.map((r) => r.id));
    for (const id of judgedWhole.keys()) if (!ids.has(id)) judgedWhole.delete(id);
    for (const key of openHint.keys()) if (!ids.has(key.slice(0, key.lastIndexOf('|')))) openHint.delete(key);
  }

  /** A moving rollout whose wave no pass has judged whole in its current state (or one rolling back). */
  function changed(): boolean {
    if (!fence()) return false;
    return repo.moving().some((r) => r.status !== 'running' || judgedWhole.get(r.id) !== wholeKey(r));
  }

  const pacer = createPassPacer({
    tickMs,
    scheduler,
    runPass: pass,
    reportsWake,
    changed,
    onError: (e) => log(`rollout engine: pass failed: ${e instanceof Error ? e.message : String(e)}`),
  });

  return {
    start: function start() {
      if (deps.onDevicesStored && !unsubscribe) unsubscribe = deps.onDevicesStored((ids) => pacer.reported(ids));
      pacer.start();
    },
    stop: async function stop() {
      unsubscribe?.();
      unsubscribe = null;
      await pacer.stop();
      await dispatcher.settled();
    },
    tick: async function tick() {
      await pacer.runFull();
      await dispatcher.settled();
    },
  };
}
