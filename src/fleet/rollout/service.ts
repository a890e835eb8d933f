import { randomBytes } from 'node:crypto';
import type { InputIssue } from '../../schema/issues.js';
import { refuse, type Outcome, type Refusal } from '../../schema/refusal.js';
import type { DeviceRecord } from '../../store/devices.js';
import { HOLDING_STATUSES, type RolloutDeviceRecord, type RolloutRecord, type RolloutStatus } from '../../store/rollouts.js';
import type { Store } from '../../store/store.js';
import { planWaves, waveIndexes, type RolloutRequest } from './spec.js';

/** Shown with every rollout: it changes what robots see. */
export const ROLLOUT_CAUTION =
  'A rollout changes camera and compute settings on robots, and new settings can hide obstacles. Keep the canary wave on one unit ' +
  "you can watch, let devices apply releases only in safe states (apply policy 'when-idle'), and follow the site's risk assessment, " +
  'robot safety standards and local regulations.';

/** Why a rollout request is refused: the rollout is not stored, the request is invalid, or it clashes with stored state. */
export type RolloutRefusalCode = 'not-found' | 'invalid' | 'conflict';
/** A refusal's `detail` carries extra data for the answer, e.g. the devices another rollout holds. */
export type ServiceResult<T> = Outcome<T, RolloutRefusalCode>;

const fail = refuse<RolloutRefusalCode>;

export interface WaveSummary {
  wave: number;
  devices: number;
  counts: Record<string, number>;
}

/** A rollout as the API and the CLI show it. */
export interface RolloutView extends RolloutRecord {
  waves: WaveSummary[];
  devices: RolloutDeviceRecord[];
  rollback: { restored: number; pending: number; nothingToRestore: number } | null;
}

export interface RolloutService {
  create(request: RolloutRequest, actor: string, at: string): ServiceResult<RolloutView>;
  view(id: string): RolloutView | null;
  list(filter?: { status?: RolloutStatus; limit?: number }): RolloutRecord[];
  pause(id: string, actor: string, at: string): ServiceResult<RolloutView>;
  /** Reopens the gate of the failed devices of the current wave (only their new events count) and runs again. */
  resume(id: string, actor: string, at: string): ServiceResult<RolloutView>;
  abort(id: string, actor: string, at: string): ServiceResult<RolloutView>;
  /**
   * Gives each moved device its previous release's content again, as a re-issue with a higher sequence
   * (the engine sends them and tracks convergence).
   */
  rollback(id: string, actor: string, at: string): ServiceResult<RolloutView>;
}

function resolveTargets(store: Store, request: RolloutRequest, deviceClassId: string): ServiceResult<DeviceRecord[]> {
  const t = request.target;
  if ('deviceIds' in t) {
    const issues: InputIssue[] = [];
    const seen = new Set<string>();
    const devices: DeviceRecord[] = [];
    t.deviceIds.forEach((id, i) => {
      if (seen.has(id)) return;
      seen.add(id);
      const d = store.devices.get(id);
      if (!d) issues.push({ path: `target.deviceIds[${i}]`, message: `no device '${id}' is enrolled` });
      else if (d.deviceClassId !== deviceClassId) {
        issues.push({ path: `target.deviceIds[${i}]`, message: `device '${id}' is a '${d.deviceClassId}'; the release is for '${deviceClassId}'` });
      } else devices.push(d);
    });
    return issues.length > 0 ? fail('invalid', 'some target devices cannot take this release', issues) : { ok: true, value: devices };
  }
  if (t.deviceClassId !== undefined && t.deviceClassId !== deviceClassId) {
    return fail('invalid', 'the target class is not the release\'s class', [
      { path: 'target.deviceClassId', message: `is '${t.deviceClassId}'; the release is for '${deviceClassId}'` },
    ]);
  }
  const devices = store.devices.list({ deviceClassId }).filter((d) => t.tags.every((tag) => d.tags.includes(tag)));
  if (devices.length === 0) {
    const tags = t.tags.length > 0 ? ` with tags ${t.tags.join(', ')}` : '';
    return fail('invalid', 'no device matches the target', [{ path: 'target', message: `no '${deviceClassId}' device${tags} is enrolled` }]);
  }
  return { ok: true, value: devices };
}

/**
 * Makes a new release carrying an older one's content, with the next sequence number (src/release/reissue.ts
 * with the server's signer); returns its id, or why it cannot. Runs inside the rollback's transaction.
 */
export type Reissuer = (releaseId: string, actor: string, at: string) => { ok: true; releaseId: string } | { ok: false; message: string; issues: InputIssue[] };

export interface RolloutServiceOptions {
  newId?: () => string;
  /** Needed for rollbacks: devices refuse a release with a lower sequence than they applied, so going back is a re-issue. */
  reissue?: Reissuer;
}

class ReissueFailed extends Error {
  constructor(readonly failure: Refusal<RolloutRefusalCode>) {
    super(failure.message);
  }
}

export function createRolloutService(store: Store, options: RolloutServiceOptions = {}): RolloutService {
  const repo = store.rollouts;
  const ranges = store.eventRanges;
  const newId = options.newId ?? (() => `ro-${randomBytes(5).toString('hex')}`);

  /** Which of the devices another rollout holds. Usually no rollout holds any: then no device needs a look of its own. */
  function holders(deviceIds: readonly string[], exceptRolloutId?: string) {
    const holding = HOLDING_STATUSES.some((status) => repo.list({ status, limit: 2 }).some((r) => r.id !== exceptRolloutId));
    return holding ? repo.holders(deviceIds, exceptRolloutId) : [];
  }

  function view(id: string): RolloutView | null {
    const r = repo.get(id);
    if (!r) return null;
    const devices = repo.devices(id);
    const waves: WaveSummary[] = [];
    for (const d of devices) {
      const w = (waves[d.wave] ??= { wave: d.wave, devices: 0, counts: {} });
      w.devices += 1;
      w.counts[d.status] = (w.counts[d.status] ?? 0) + 1;
    }
    const moved = devices.filter((d) => d.assignmentId !== null);
    const rollback =
      r.rollbackBy === null
        ? null
        : {
            restored: moved.filter((d) => d.rollbackStatus === 'restored').length,
            pending: moved.filter((d) => d.rollbackStatus === null || d.rollbackStatus === 'assigned').length,
            nothingToRestore: moved.filter((d) => d.rollbackStatus === 'nothing-to-restore').length,
          };
    return { ...r, waves, devices, rollback };
  }

  /** Changes a rollout's status when it is in one of `from`; the audit entry lands in the same transaction. */
  function transition(id: string, from: readonly RolloutStatus[], verb: string, actor: string, at: string, change: (r: RolloutRecord) => void): ServiceResult<RolloutView> {
    return store.transaction(() => {
      const r = repo.get(id);
      if (!r) return fail('not-found', `rollout '${id}' not found`);
      if (!from.includes(r.status)) {
        return fail('conflict', `rollout '${id}' is ${r.status}; ${verb} needs it ${from.join(' or ')}`, [{ path: 'status', message: `is ${r.status}` }]);
      }
      change(r);
      store.audit.record({ at, actor, action: `rollout.${verb}`, target: `rollout/${id}`, detail: { from: r.status } });
      return { ok: true as const, value: view(id)! };
    });
  }

  return {
    create: function create(request, actor, at) {
      const release = store.releases.get(request.releaseId);
      if (!release) return fail('invalid', 'unknown release', [{ path: 'releaseId', message: `no release '${request.releaseId}' is stored` }]);
      return store.transaction(() => {
        const targets = resolveTargets(store, request, release.deviceClassId);
        if (!targets.ok) return targets;
        const ids = targets.value.map((d) => d.id);
        const held = holders(ids);
        if (held.length > 0) {
          const others = [...new Set(held.map((h) => h.rolloutId))];
          return fail(
            'conflict',
            `${held.length} target device(s) are already in rollout ${others.join(', ')}: ${held.slice(0, 20).map((h) => h.deviceId).join(', ')}${held.length > 20 ? ', …' : ''}`,
            held.map((h) => ({ path: 'target', message: `device '${h.deviceId}' is held by rollout '${h.rolloutId}'` })),
            { conflicts: held },
          );
        }
        const plan = planWaves(ids.length, request.waves);
        const waveOf = waveIndexes(plan);
        const id = newId();
        repo.insert({
          id,
          releaseId: release.id,
          deviceClassId: release.deviceClassId,
          spec: request,
          waveCount: plan.length,
          createdAt: at,
          createdBy: actor,
          devices: ids.map((deviceId, i) => ({ deviceId, wave: waveOf[i]! })),
        });
        store.audit.record({
          at,
          actor,
          action: 'rollout.create',
          target: `rollout/${id}`,
          detail: { releaseId: release.id, version: release.version, devices: ids.length, waves: plan, gate: request.gate, offline: request.offline, ...(request.note ? { note: request.note } : {}) },
        });
        return { ok: true as const, value: view(id)! };
      });
    },
    view,
    list: (filter) => repo.list(filter),
    pause: (id, actor, at) => transition(id, ['running'], 'pause', actor, at, () => repo.setStatus(id, 'paused', at, { kind: 'operator', by: actor, at })),
    resume: (id, actor, at) =>
      transition(id, ['paused'], 'resume', actor, at, (r) => {
        for (const d of repo.devices(id, r.currentWave)) {
          if (d.status === 'failed') repo.reopenDevice(id, d.deviceId, ranges.maxSeq(d.deviceId), at);
        }
        repo.startWave(id, r.currentWave, at);
        repo.setStatus(id, 'running', at);
      }),
    abort: (id, actor, at) => transition(id, ['running', 'paused'], 'abort', actor, at, () => repo.setStatus(id, 'aborted', at, { kind: 'aborted', by: actor, at })),
    rollback: function rollback(id, actor, at) {
      // A finished rollout no longer holds its devices: refuse when a newer rollout has taken some of them.
      const moved = repo.devices(id).filter((d) => d.assignmentId !== null).map((d) => d.deviceId);
      const held = holders(moved, id);
      if (held.length > 0) {
        return fail(
          'conflict',
          `cannot roll back: ${held.length} of its devices are now in rollout ${[...new Set(held.map((h) => h.rolloutId))].join(', ')}`,
          held.map((h) => ({ path: 'devices', message: `device '${h.deviceId}' is held by rollout '${h.rolloutId}'` })),
          { conflicts: held },
        );
      }
      const reissue = options.reissue;
      if (!reissue) return fail('conflict', 'cannot roll back: this server was started without a release signer to re-issue the previous releases');
      try {
        return transition(id, ['running', 'paused', 'completed', 'aborted'], 'rollback', actor, at, () => {
          // One re-issue per distinct previous release, in the same transaction as the rollback's start.
          const previous = new Set(
            repo.devices(id).filter((d) => d.assignmentId !== null && d.rollbackStatus === null && d.previousReleaseId !== null && d.restoreReleaseId === null).map((d) => d.previousReleaseId!),
          );
          for (const releaseId of previous) {
            const made = reissue(releaseId, actor, at);
            if (!made.ok) throw new ReissueFailed(fail('conflict', `cannot roll back: ${made.message}`, made.issues));
            repo.setRestoreRelease(id, releaseId, made.releaseId);
          }
          repo.startRollback(id, actor, at);
        });
      } catch (e) {
        if (e instanceof ReissueFailed) return e.failure;
        throw e;
      }
    },
  };
}
