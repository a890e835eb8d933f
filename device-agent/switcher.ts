import type { AgentClock } from './clock.js';
import { DRIVER_STEPS, type DriverStep, type ProfileDriver, type ProfileTarget } from './driver.js';

/** `toolMs`: the part of actuation spent waiting for external tools (v4l2-ctl, commands), when the driver reports it. */
export type SwitchOutcome =
  | { ok: true; overheadMs: number; actuationMs: number; toolMs: number; stepsRun: DriverStep[] }
  | { ok: false; step: DriverStep; error: string; restored: boolean; overheadMs: number; actuationMs: number; toolMs: number };

function sameCamera(a: ProfileTarget, b: ProfileTarget): boolean {
  const x = a.task.camera;
  const y = b.task.camera;
  return x.focusDistanceM === y.focusDistanceM && x.fNumber === y.fNumber && x.exposureUs === y.exposureUs && x.analogGain === y.analogGain;
}

function needed(step: DriverStep, from: ProfileTarget | null, to: ProfileTarget): boolean {
  if (!from) return true;
  if (step === 'setMemoryPartition') {
    return from.task.memory.weightBufferKib !== to.task.memory.weightBufferKib || from.task.memory.activationBufferKib !== to.task.memory.activationBufferKib;
  }
  if (step === 'loadWeights') return from.task.model.sha256 !== to.task.model.sha256;
  return !sameCamera(from, to);
}

function run(driver: ProfileDriver, step: DriverStep, target: ProfileTarget): Promise<void> {
  if (step === 'setMemoryPartition') return driver.setMemoryPartition(target.task.memory, target);
  if (step === 'loadWeights') return driver.loadWeights(target.weightsPath, target.task.model.sha256, target);
  return driver.applyCamera(target.task.camera, target);
}

/**
 * Moves the device from one whole profile to another, one step at a time: memory partition, weights,
 * camera, skipping a step whose settings do not change. If a step throws, every step tried so far
 * (the failing one included) is run again with the previous profile's values, in the same order, so
 * the device never keeps half a profile. Time inside driver calls is actuation; the rest is overhead.
 */
export async function switchProfile(driver: ProfileDriver, from: ProfileTarget | null, to: ProfileTarget, clock: AgentClock): Promise<SwitchOutcome> {
  const started = clock.monotonicMs();
  const toolBefore = driver.toolMs?.() ?? 0;
  const toolMs = () => (driver.toolMs?.() ?? 0) - toolBefore;
  let actuationMs = 0;
  const tried: DriverStep[] = [];
  for (const step of DRIVER_STEPS) {
    if (!needed(step, from, to)) continue;
    tried.push(step);
    const t0 = clock.monotonicMs();
    try {
      await run(driver, step, to);
    } catch (e) {
      actuationMs += clock.monotonicMs() - t0;
      const error = e instanceof Error ? e.message : String(e);
      const restored = from ? await restore(driver, tried, from) : false;
      const overheadMs = Math.max(0, clock.monotonicMs() - started - actuationMs);
      return { ok: false, step, error, restored, overheadMs, actuationMs, toolMs: toolMs() };
    }
    actuationMs += clock.monotonicMs() - t0;
  }
  return { ok: true, overheadMs: Math.max(0, clock.monotonicMs() - started - actuationMs), actuationMs, toolMs: toolMs(), stepsRun: tried };
}

async function restore(driver: ProfileDriver, steps: DriverStep[], previous: ProfileTarget): Promise<boolean> {
  try {
    for (const step of steps) await run(driver, step, previous);
    return true;
  } catch {
    return false;
  }
}
