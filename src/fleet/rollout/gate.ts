import type { RolloutDeviceStatus } from '../../store/rollouts.js';
import type { GateSettings, OfflinePolicy } from './spec.js';
import { sToMs } from '../../physics/units.js';

/** What the server knows of one device of a wave, gathered from its state and its events since it was assigned. */
export interface DeviceFacts {
  status: RolloutDeviceStatus;
  online: boolean;
  /** ms since the wave started (for devices still waiting to be assigned). */
  sinceWaveStartMs: number;
  /** ms since the device was assigned (or its gate was reopened); null before. */
  sinceAssignedMs: number | null;
  /** ms since it was seen applying the release; null before. */
  sinceAppliedMs: number | null;
  /** The device reports this release as the one it runs, or sent release-applied for it. */
  applied: boolean;
  /** Why the device refused this release (release-refused event, or its state's `refused`); null when it did not. */
  refusedReason: string | null;
  /** Why the device holds the release back (its state's `pending`), e.g. waiting for the robot to stop. */
  pendingReason: string | null;
  /** Telemetry on this release since assignment: frames, and frame-weighted sums of measured and predicted inference ms. */
  telemetry: { frames: number; measuredMsSum: number; predictedMsSum: number };
}

export interface GateContext {
  gate: GateSettings;
  offline: OfflinePolicy;
  /** Measured ÷ predicted latency of the device class from calibration, or 1 when there is not enough data. */
  latencyFactor: number;
}

/** What the engine should do with a device: keep it as is, move it to a new status, or assign it now. */
export type DeviceVerdict =
  | { action: 'keep' }
  | { action: 'assign' }
  | { action: 'set'; status: RolloutDeviceStatus; reason: string | null };

const s = (ms: number) => `${Math.round(ms / 100) / 10} s`;

/** The offline policy: after waitS, fail the gate or leave the device out (an assigned one keeps its assignment). */
function offlineVerdict(facts: DeviceFacts, sinceMs: number, ctx: GateContext): DeviceVerdict {
  if (sinceMs <= sToMs(ctx.offline.waitS)) return { action: 'keep' };
  const reason = `offline for more than ${ctx.offline.waitS} s (policy: ${ctx.offline.then})`;
  if (ctx.offline.then === 'fail') return { action: 'set', status: 'failed', reason };
  const kept = facts.status === 'waiting' ? '; not assigned' : '; it keeps the assignment and applies it when it returns';
  return { action: 'set', status: 'skipped', reason: `${reason}${kept}` };
}

/** The latency part of the gate: measured mean against the calibrated prediction, within the tolerance. */
export function latencyVerdict(t: DeviceFacts['telemetry'], ctx: GateContext): { ok: boolean; ratio: number; reason: string } {
  const expectedMs = (t.predictedMsSum / t.frames) * ctx.latencyFactor;
  const measuredMs = t.measuredMsSum / t.frames;
  const ratio = expectedMs > 0 ? measuredMs / expectedMs : Number.POSITIVE_INFINITY;
  const off = Math.round((ratio - 1) * 1000) / 10;
  const calibrated = ctx.latencyFactor === 1 ? 'uncalibrated' : `calibrated ×${ctx.latencyFactor.toFixed(3)}`;
  return {
    ok: Math.abs(ratio - 1) <= ctx.gate.latencyTolerance,
    ratio,
    reason: `mean inference ${measuredMs.toFixed(2)} ms over ${t.frames} frames is ${off > 0 ? '+' : ''}${off}% from the expected ${expectedMs.toFixed(2)} ms (${calibrated}; tolerance ±${ctx.gate.latencyTolerance * 100}%)`,
  };
}

/**
 * One device's step through the gate: waiting (assign once online; the offline policy after waitS) →
 * assigned (applied, or refused, or timed out) → applied (enough telemetry within the latency tolerance)
 * → passed. Pure: the engine gathers the facts and stores the verdict.
 */
export function judgeDevice(facts: DeviceFacts, ctx: GateContext): DeviceVerdict {
  switch (facts.status) {
    case 'waiting':
      return facts.online ? { action: 'assign' } : offlineVerdict(facts, facts.sinceWaveStartMs, ctx);
    case 'assigned': {
      if (facts.refusedReason !== null) return { action: 'set', status: 'failed', reason: `refused the release: ${facts.refusedReason}` };
      if (facts.applied) return { action: 'set', status: 'applied', reason: null };
      const since = facts.sinceAssignedMs ?? 0;
      if (!facts.online) return offlineVerdict(facts, since, ctx);
      if (since > sToMs(ctx.gate.applyTimeoutS)) {
        const pending = facts.pendingReason ? ` (the device holds it back: ${facts.pendingReason})` : '';
        return { action: 'set', status: 'failed', reason: `not applied within ${ctx.gate.applyTimeoutS} s${pending}` };
      }
      return { action: 'keep' };
    }
    case 'applied': {
      if (ctx.gate.telemetryFrames === 0) return { action: 'set', status: 'passed', reason: null };
      if (facts.telemetry.frames >= ctx.gate.telemetryFrames) {
        const v = latencyVerdict(facts.telemetry, ctx);
        return v.ok ? { action: 'set', status: 'passed', reason: v.reason } : { action: 'set', status: 'failed', reason: v.reason };
      }
      const since = facts.sinceAppliedMs ?? 0;
      if (since > sToMs(ctx.gate.telemetryTimeoutS)) {
        return {
          action: 'set',
          status: 'failed',
          reason: `${facts.telemetry.frames} of ${ctx.gate.telemetryFrames} telemetry frames within ${ctx.gate.telemetryTimeoutS} s of applying (${s(since)} so far)`,
        };
      }
      return { action: 'keep' };
    }
    default:
      return { action: 'keep' };
  }
}

/** A wave passes when every device passed or was skipped; it fails as soon as any device failed. */
export function waveOutcome(counts: Partial<Record<RolloutDeviceStatus, number>>): 'passed' | 'failed' | 'open' {
  if ((counts.failed ?? 0) > 0) return 'failed';
  return (counts.waiting ?? 0) + (counts.assigned ?? 0) + (counts.applied ?? 0) === 0 ? 'passed' : 'open';
}

/** What a pass does with a device: assign it, move it through one or more statuses, or nothing. */
export type DeviceSteps = { action: 'assign' } | { action: 'set'; steps: Array<{ status: RolloutDeviceStatus; reason: string | null }> } | { action: 'keep' };

/**
 * judgeDevice, followed one step further when the device just applied: when the gate waits for no telemetry,
 * applied → passed needs no new fact, so a device goes from assigned to passed in one pass (applied first, so
 * its time of applying is kept).
 */
export function judgeSteps(facts: DeviceFacts, ctx: GateContext): DeviceSteps {
  const first = judgeDevice(facts, ctx);
  if (first.action !== 'set') return first;
  const steps = [{ status: first.status, reason: first.reason }];
  if (first.status === 'applied') {
    const next = judgeDevice({ ...facts, status: 'applied', sinceAppliedMs: 0 }, ctx);
    if (next.action === 'set') steps.push({ status: next.status, reason: next.reason });
  }
  return { action: 'set', steps };
}

/**
 * How long facts must stand unchanged before the clock alone can move a device (ms): an assigned device times
 * out or counts as offline no sooner than the shorter of applyTimeoutS and waitS after its assignment; an
 * applied one misses its telemetry no sooner than telemetryTimeoutS after applying. A pass that is not woken by
 * a device's report need look only at devices older than that (and at waiting ones).
 */
export function clockDelaysMs(ctx: Pick<GateContext, 'gate' | 'offline'>): { assignedMs: number; appliedMs: number } {
  return { assignedMs: sToMs(Math.min(ctx.gate.applyTimeoutS, ctx.offline.waitS)), appliedMs: sToMs(ctx.gate.telemetryTimeoutS) };
}
