import { describe, expect, it } from 'vitest';
import { clockDelaysMs, judgeDevice, judgeSteps, waveOutcome, type DeviceFacts, type GateContext } from '../../src/fleet/rollout/gate.js';

// The gate's rules as stated in the rollout settings (common practice for staged rollouts: canary, then
// widening waves, each held until its devices confirm). Times in ms.
const ctx: GateContext = {
  gate: { applyTimeoutS: 60, telemetryFrames: 100, telemetryTimeoutS: 120, latencyTolerance: 0.2 },
  offline: { waitS: 30, then: 'fail' },
  latencyFactor: 1,
};
const base: DeviceFacts = {
  status: 'assigned', online: true, sinceWaveStartMs: 0, sinceAssignedMs: 0, sinceAppliedMs: null,
  applied: false, refusedReason: null, pendingReason: null, telemetry: { frames: 0, measuredMsSum: 0, predictedMsSum: 0 },
};

describe('rollout gate, one device at a time', () => {
  it('assigns a waiting device once it is online; applies the offline policy after waitS', () => {
    expect(judgeDevice({ ...base, status: 'waiting' }, ctx)).toEqual({ action: 'assign' });
    expect(judgeDevice({ ...base, status: 'waiting', online: false, sinceWaveStartMs: 29_000 }, ctx)).toEqual({ action: 'keep' });
    expect(judgeDevice({ ...base, status: 'waiting', online: false, sinceWaveStartMs: 31_000 }, ctx)).toEqual({
      action: 'set', status: 'failed', reason: 'offline for more than 30 s (policy: fail)',
    });
    const skip = { ...ctx, offline: { waitS: 30, then: 'skip' as const } };
    expect(judgeDevice({ ...base, status: 'waiting', online: false, sinceWaveStartMs: 31_000 }, skip)).toEqual({
      action: 'set', status: 'skipped', reason: 'offline for more than 30 s (policy: skip); not assigned',
    });
  });

  it('fails on a refusal, passes to applied when the device runs the release, fails after the apply timeout naming the hold', () => {
    expect(judgeDevice({ ...base, refusedReason: 'bad-signature: no match' }, ctx)).toEqual({
      action: 'set', status: 'failed', reason: 'refused the release: bad-signature: no match',
    });
    expect(judgeDevice({ ...base, applied: true }, ctx)).toEqual({ action: 'set', status: 'applied', reason: null });
    expect(judgeDevice({ ...base, sinceAssignedMs: 61_000, pendingReason: 'waiting for the robot to stop moving' }, ctx)).toEqual({
      action: 'set', status: 'failed', reason: 'not applied within 60 s (the device holds it back: waiting for the robot to stop moving)',
    });
    expect(judgeDevice({ ...base, sinceAssignedMs: 59_000 }, ctx)).toEqual({ action: 'keep' });
  });

  it('judges latency only after enough telemetry frames, within the tolerance', () => {
    const applied = { ...base, status: 'applied' as const, sinceAppliedMs: 1000 };
    expect(judgeDevice({ ...applied, telemetry: { frames: 99, measuredMsSum: 99 * 30, predictedMsSum: 99 * 10 } }, ctx)).toEqual({ action: 'keep' });
    // 11.5 ms against 10 ms: +15 %, inside ±20 %.
    expect(judgeDevice({ ...applied, telemetry: { frames: 100, measuredMsSum: 1150, predictedMsSum: 1000 } }, ctx)).toMatchObject({ status: 'passed' });
    // 12.5 ms: +25 %, outside.
    expect(judgeDevice({ ...applied, telemetry: { frames: 100, measuredMsSum: 1250, predictedMsSum: 1000 } }, ctx)).toMatchObject({
      status: 'failed', reason: expect.stringMatching(/^mean inference 12\.50 ms over 100 frames is \+25% from the expected 10\.00 ms/),
    });
    expect(judgeDevice({ ...applied, sinceAppliedMs: 121_000, telemetry: { frames: 40, measuredMsSum: 400, predictedMsSum: 400 } }, ctx)).toMatchObject({
      status: 'failed', reason: expect.stringMatching(/^40 of 100 telemetry frames within 120 s/),
    });
  });

  it('goes from assigned through applied to passed in one step when the gate waits for no telemetry, and only then', () => {
    const noTelemetry = { ...ctx, gate: { ...ctx.gate, telemetryFrames: 0 } };
    expect(judgeSteps({ ...base, applied: true }, noTelemetry)).toEqual({
      action: 'set', steps: [{ status: 'applied', reason: null }, { status: 'passed', reason: null }],
    });
    expect(judgeSteps({ ...base, applied: true }, ctx)).toEqual({ action: 'set', steps: [{ status: 'applied', reason: null }] });
    expect(judgeSteps({ ...base, status: 'waiting' }, ctx)).toEqual({ action: 'assign' });
    expect(judgeSteps(base, ctx)).toEqual({ action: 'keep' });
  });

  it('the clock alone moves an assigned device no sooner than min(applyTimeoutS, waitS), an applied one no sooner than telemetryTimeoutS', () => {
    expect(clockDelaysMs(ctx)).toEqual({ assignedMs: 30_000, appliedMs: 120_000 });
    // Just inside each delay the verdict stays 'keep' for a device with nothing new to say.
    expect(judgeDevice({ ...base, online: false, sinceAssignedMs: 30_000 }, ctx)).toEqual({ action: 'keep' });
    expect(judgeDevice({ ...base, sinceAssignedMs: 30_000 }, ctx)).toEqual({ action: 'keep' });
    expect(judgeDevice({ ...base, status: 'applied', sinceAppliedMs: 120_000 }, ctx)).toEqual({ action: 'keep' });
  });

  it('a wave passes when every device passed or was skipped, and fails as soon as one failed', () => {
    expect(waveOutcome({ passed: 4, skipped: 1 })).toBe('passed');
    expect(waveOutcome({ passed: 4, assigned: 1 })).toBe('open');
    expect(waveOutcome({ passed: 3, applied: 1, failed: 1 })).toBe('failed');
  });
});
