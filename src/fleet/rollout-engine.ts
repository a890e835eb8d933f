import { releaseSchema, type Release } from '../protocol/release.js';
import { createRolloutRepository, type RolloutDeviceRecord, type RolloutRecord } from '../store/rollouts.js';
import type { Store } from '../store/store.js';
import { assignReleases, type AssignInput, type ReleasePublisher } from './assign.js';
import { createCalibrator } from './calibration.js';
import { createDriftMonitor, DEFAULT_DRIFT_TOLERANCE } from './drift.js';
import { createEventRangeReader } from './event-range.js';
import { createFactsReader } from './rollout-facts.js';
import { judgeDevice, waveOutcome } from './rollout-gate.js';
import type { RolloutSpec } from './rollout-spec.js';

/** The actor of changes the engine makes on its own (wave starts, gate pauses, completion). */
export const ENGINE_ACTOR = 'fleet engine';

export interface RolloutEngineOptions {
  /** How often the engine looks at every moving rollout, in ms (200 by default). */
  tickMs?: number;
  /** How often drift is checked and the gate's class calibration refreshed, in ms (10,000 by default). */
  calibrationEveryMs?: number;
  driftTolerance?: number;
  /** How many assignments one transaction records (100 by default); all are sent without waiting between batches. */
  assignConcurrency?: number;
  log?: (line: string) => void;
}

export interface RolloutEngineDeps extends RolloutEngineOptions {
  store: Store;
  /** Sends releases over the bus; without it assignments are recorded only (devices get them on the bus's next start). */
  publisher: ReleasePublisher | undefined;
  clock: { now(): Date };
}

export interface RolloutEngine {
  /** Starts the timer. Rollouts left running or rolling back by an earlier process carry on from their stored state. */
  start(): void;
  /** Stops the timer and waits for a pass in progress. */
  stop(): Promise<void>;
  /** Runs one pass now (after the one in progress, if any). */
  tick(): Promise<void>;
}

class AlreadyDone extends Error {}

/**
 * Advances rollouts from the database alone, so a restarted server continues where the last one stopped.
 * Each pass judges the devices of the current wave (src/fleet/rollout-gate.ts), assigns the ones that may
 * go, pauses on a failed gate, and opens the next wave when the current one passed. An assignment and
 * the rollout's mark that the device was assigned land in one transaction, and the mark only moves a
 * device out of 'waiting': a device is never assigned twice by one rollout, whatever crashed when.
 */
export function createRolloutEngine(deps: RolloutEngineDeps): RolloutEngine {
  const { store, publisher, clock } = deps;
  const log = deps.log ?? (() => {});
  const tickMs = deps.tickMs ?? 200;
  const calibrationEveryMs = deps.calibrationEveryMs ?? 10_000;
  const concurrency = deps.assignConcurrency ?? 100;
  const repo = createRolloutRepository(store.db);
  const facts = createFactsReader(store.db);
  const ranges = createEventRangeReader(store.db);
  const drift = createDriftMonitor({ store, clock, tolerance: deps.driftTolerance ?? DEFAULT_DRIFT_TOLERANCE });
  const releases = new Map<string, Release>();
  let factors = new Map<string, number>();
  let lastCalibrationMs = Number.NEGATIVE_INFINITY;
  let timer: NodeJS.Timeout | null = null;
  let inFlight: Promise<void> = Promise.resolve();
  let busy = false;
  let restUntil = 0;

  function releaseOf(id: string): Release {
    let r = releases.get(id);
    if (!r) {
      r = releaseSchema.parse((store.releases.get(id)?.signed as { release?: unknown } | undefined)?.release);
      releases.set(id, r);
    }
    return r;
  }

  function latencyFactor(deviceClassId: string): number {
    if (!factors.has(deviceClassId)) factors.set(deviceClassId, createCalibrator(store).forValidator(deviceClassId)?.latencyFactor ?? 1);
    return factors.get(deviceClassId)!;
  }

  function audit(r: RolloutRecord, action: string, at: string, detail: unknown) {
    store.audit.record({ at, actor: ENGINE_ACTOR, action, target: `rollout/${r.id}`, detail });
  }

  /**
   * Assigns devices in batches: each batch's records in one transaction (the rollout's mark with each), then
   * its sends. A device whose mark finds it already moved is left out: it is never assigned twice.
   */
  async function assignAll(r: RolloutRecord, list: RolloutDeviceRecord[], rollback: boolean, at: string): Promise<void> {
    const batches: Array<Promise<void>> = [];
    for (let i = 0; i < list.length; i += concurrency) {
      const batch = list.slice(i, i + concurrency);
      const inputs: AssignInput[] = batch.map((d) => {
        const previous = store.devices.get(d.deviceId)?.assignedReleaseId ?? null;
        const eventsAfterSeq = ranges.maxSeq(d.deviceId);
        return {
          deviceId: d.deviceId,
          releaseId: rollback ? d.previousReleaseId! : r.releaseId,
          actor: rollback ? (r.rollbackBy ?? r.createdBy) : r.createdBy,
          cause: `${rollback ? 'rollback' : 'rollout'}:${r.id}`,
          at,
          withinTransaction: (a) => {
            const marked = rollback
              ? repo.markRollback(r.id, d.deviceId, 'assigned', a.id)
              : repo.markAssigned(r.id, d.deviceId, { assignmentId: a.id, previousReleaseId: previous, at, eventsAfterSeq });
            if (!marked) throw new AlreadyDone(`${d.deviceId} was already moved by rollout ${r.id}`);
          },
        };
      });
      // Records are written when assignReleases is called; its sends are awaited after every batch is recorded.
      batches.push(assignReleases(store, publisher, inputs).then((results) => results.forEach((result, k) => {
        const d = batch[k]!;
        if (!result.ok && result.code === 'not-recorded') {
          if (!(result.error instanceof AlreadyDone)) log(`rollout ${r.id}: ${d.deviceId} not assigned: ${result.message}`);
        } else if (!result.ok && !rollback) repo.setDeviceStatus(r.id, d.deviceId, 'failed', result.message, at);
        else if (!result.ok) log(`rollout ${r.id}: cannot restore ${d.deviceId}: ${result.message}`);
        else if (result.publish.status === 'not-sent') log(`rollout ${r.id}: ${d.deviceId} assigned but not sent (${result.publish.reason})`);
      })));
    }
    await Promise.all(batches);
  }

  async function advance(r: RolloutRecord, nowMs: number): Promise<void> {
    const at = new Date(nowMs).toISOString();
    if (r.waveStartedAt === null) {
      repo.startWave(r.id, r.currentWave, at);
      audit(r, 'rollout.wave-start', at, { wave: r.currentWave });
      r = repo.get(r.id)!;
    }
    const spec = r.spec as RolloutSpec;
    const release = releaseOf(r.releaseId);
    const ctx = { gate: spec.gate, offline: spec.offline, latencyFactor: latencyFactor(r.deviceClassId) };
    const waveStartMs = Date.parse(r.waveStartedAt!);
    const toAssign: RolloutDeviceRecord[] = [];
    store.transaction(() => {
      const open = facts.openWave({ rolloutId: r.id, wave: r.currentWave, release, nowMs, waveStartMs, needTelemetry: spec.gate.telemetryFrames > 0 });
      for (const { device: d, facts: f } of open) {
        const verdict = judgeDevice(f, ctx);
        if (verdict.action === 'assign') toAssign.push(d);
        else if (verdict.action === 'set') repo.setDeviceStatus(r.id, d.deviceId, verdict.status, verdict.reason, at);
      }
    });
    await assignAll(r, toAssign, false, at);
    const outcome = waveOutcome(repo.waveCounts(r.id, r.currentWave));
    if (outcome === 'open') return;
    store.transaction(() => {
      const current = repo.get(r.id);
      // An operator may have paused or aborted it while this pass awaited the bus.
      if (!current || current.status !== 'running' || current.currentWave !== r.currentWave) return;
      if (outcome === 'failed') {
        const failures = repo.devices(r.id, r.currentWave).filter((d) => d.status === 'failed').map((d) => ({ deviceId: d.deviceId, reason: d.reason ?? 'failed' }));
        const reason = { kind: 'gate', wave: r.currentWave, at, failures };
        repo.setStatus(r.id, 'paused', at, reason);
        audit(r, 'rollout.pause', at, reason);
        log(`rollout ${r.id}: wave ${r.currentWave} failed its gate (${failures.map((f) => f.deviceId).join(', ')}); paused`);
      } else if (r.currentWave + 1 < r.waveCount) {
        repo.startWave(r.id, r.currentWave + 1, at);
        audit(r, 'rollout.wave-start', at, { wave: r.currentWave + 1, previousWavePassed: r.currentWave });
      } else {
        repo.setStatus(r.id, 'completed', at);
        audit(r, 'rollout.complete', at, { waves: r.waveCount });
      }
    });
  }

  async function rollBack(r: RolloutRecord, nowMs: number): Promise<void> {
    const at = new Date(nowMs).toISOString();
    const moved = repo.devices(r.id).filter((d) => d.assignmentId !== null);
    const toRestore: RolloutDeviceRecord[] = [];
    store.transaction(() => {
      for (const d of moved) {
        if (d.rollbackStatus === null && d.previousReleaseId === null) repo.markRollback(r.id, d.deviceId, 'nothing-to-restore', null);
        else if (d.rollbackStatus === null) toRestore.push(d);
        else if (d.rollbackStatus === 'assigned' && facts.reported(d.deviceId)?.releaseId === d.previousReleaseId) {
          repo.setRollbackStatus(r.id, d.deviceId, 'restored');
        }
      }
    });
    await assignAll(r, toRestore, true, at);
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
  }

  async function pass(): Promise<void> {
    const nowMs = clock.now().getTime();
    if (nowMs - lastCalibrationMs >= calibrationEveryMs) {
      lastCalibrationMs = nowMs;
      factors = new Map();
      for (const change of drift.check()) {
        log(`drift ${change.kind}: ${change.record.deviceId} ${change.record.quantity} ${(change.record.deviation * 100).toFixed(1)}% from its class`);
      }
    }
    for (const r of repo.moving()) {
      try {
        if (r.status === 'running') await advance(r, nowMs);
        else await rollBack(r, nowMs);
      } catch (e) {
        log(`rollout ${r.id}: pass failed: ${e instanceof Error ? e.message : String(e)}`);
      }
    }
  }

  function tick(): Promise<void> {
    const run = async () => {
      busy = true;
      const started = performance.now();
      try {
        await pass();
      } finally {
        busy = false;
        restUntil = performance.now() + (performance.now() - started);
      }
    };
    inFlight = inFlight.then(run, run);
    return inFlight;
  }

  return {
    start: function start() {
      if (timer) return;
      // A slow pass (thousands of devices) is not queued behind, and the next one waits at least as long as the
      // last one took: the engine keeps to about half of the event loop, leaving the rest to the bus bridge.
      timer = setInterval(() => {
        if (!busy && performance.now() >= restUntil) void tick();
      }, tickMs);
      timer.unref?.();
    },
    stop: async function stop() {
      if (timer) clearInterval(timer);
      timer = null;
      await inFlight.catch(() => undefined);
    },
    tick,
  };
}
