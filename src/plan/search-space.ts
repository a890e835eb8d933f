/**
 * The axes of the search: focus distances, f-number stops, exposure times, analog gains and memory
 * partitions, built from the task, the device class and the options. Pure; bad options throw an
 * InputError naming the option.
 */
import { sToUs } from '../physics/units.js';
import { InputError } from '../schema/index.js';
import type { DeviceClass, InputIssue, Task } from '../schema/index.js';
import { imageSetup, worstCombinedBlurPx } from '../validate/index.js';
import { refinedFocusM } from './focus.js';
import { clampList, gainLadder, geometricLadder, memoryPartitions } from './ladders.js';
import { DEFAULT_PLAN_OPTIONS } from './types.js';
import type { PlanOptions, ResolvedPlanOptions, SearchAxes } from './types.js';

/** Focus settings are written to 0.1 mm (10,000 steps per metre), finer than lens actuators step (common practice). */
export const FOCUS_STEPS_PER_M = 10_000;

/**
 * Worst combined blur over the validator's sampled range with the camera still (optics and pixel only), sensor px:
 * what the focus axis minimises.
 */
export function worstTotalBlurPx(task: Task, deviceClass: DeviceClass, fNumber: number, focusM: number): number {
  const still = imageSetup({ ...task, maxRelativeSpeedMPerS: 0, maxYawRateDegPerS: 0, maxPitchRateDegPerS: 0 }, deviceClass, 0, deviceClass.sensor.widthPx);
  return worstCombinedBlurPx(task, still, fNumber, focusM);
}

function roundFocusM(m: number): number {
  // Divide by the step count rather than multiply by 1e-4, so 0.48 stays 0.48 and not 0.48000000000000004.
  return Math.round(m * FOCUS_STEPS_PER_M) / FOCUS_STEPS_PER_M;
}

/**
 * Focus distances to try: the one that minimises the worst total blur over the range (closed form refined
 * by golden-section search), then `spread` fractions either side, all at or beyond the nearest focus.
 * Defocus dominates how the blur changes with focus, so the best focus found at the widest stop is used at every
 * f-number (diffraction and the pixel add nearly the same blur at every distance).
 */
export function focusAxisM(task: Task, deviceClass: DeviceClass, spread: readonly number[]): number[] {
  const { lens } = deviceClass;
  const widest = lens.fNumberStops[0]!;
  const best = refinedFocusM(task.nearDistanceM, task.farDistanceM, lens.nearestFocusM, (s) => worstTotalBlurPx(task, deviceClass, widest, s));
  const out = [roundFocusM(best.focusM)];
  if (out[0]! < lens.nearestFocusM) out[0] = lens.nearestFocusM;
  for (const k of spread) {
    for (const m of [best.focusM * (1 - k), best.focusM * (1 + k)]) {
      const r = roundFocusM(m);
      if (r >= lens.nearestFocusM && !out.includes(r)) out.push(r);
    }
  }
  return out;
}

/** Fill in defaults and refuse options that cannot describe a search. */
export function resolveOptions(options: PlanOptions = {}): ResolvedPlanOptions {
  const issues: InputIssue[] = [];
  const r: ResolvedPlanOptions = {
    minExposureUs: options.minExposureUs ?? DEFAULT_PLAN_OPTIONS.minExposureUs,
    exposureStepsPerOctave: options.exposureStepsPerOctave ?? DEFAULT_PLAN_OPTIONS.exposureStepsPerOctave,
    focusSpread: options.focusSpread ?? DEFAULT_PLAN_OPTIONS.focusSpread,
    granuleKib: options.granuleKib ?? DEFAULT_PLAN_OPTIONS.granuleKib,
    everyActivationSize: options.everyActivationSize ?? DEFAULT_PLAN_OPTIONS.everyActivationSize,
    nearMisses: options.nearMisses ?? DEFAULT_PLAN_OPTIONS.nearMisses,
    maxCandidates: options.maxCandidates ?? DEFAULT_PLAN_OPTIONS.maxCandidates,
  };
  const positive = (path: string, v: number) => {
    if (!(Number.isFinite(v) && v > 0)) issues.push({ path, message: `must be a finite number greater than 0 (got ${v})` });
  };
  positive('options.minExposureUs', r.minExposureUs);
  positive('options.exposureStepsPerOctave', r.exposureStepsPerOctave);
  positive('options.granuleKib', r.granuleKib);
  positive('options.maxCandidates', r.maxCandidates);
  if (!(Number.isInteger(r.nearMisses) && r.nearMisses >= 0)) issues.push({ path: 'options.nearMisses', message: `must be a whole number, 0 or more (got ${r.nearMisses})` });
  r.focusSpread.forEach((k, i) => {
    if (!(Number.isFinite(k) && k > 0 && k < 1)) issues.push({ path: `options.focusSpread[${i}]`, message: `must be a fraction between 0 and 1 exclusive (got ${k})` });
  });
  const lists: [string, number[] | undefined][] = [
    ['options.exposuresUs', options.exposuresUs],
    ['options.analogGains', options.analogGains],
    ['options.fNumbers', options.fNumbers],
  ];
  for (const [path, list] of lists) {
    if (list === undefined) continue;
    if (list.length === 0) issues.push({ path, message: 'must list at least one value' });
    list.forEach((v, i) => positive(`${path}[${i}]`, v));
  }
  if (issues.length > 0) throw new InputError('plan options are not valid', issues, 'plan options');
  return r;
}

/** Every axis of the search for one task and device class (the model axis is added by the caller). */
export function searchAxes(task: Task, deviceClass: DeviceClass, options: PlanOptions, resolved: ResolvedPlanOptions): Omit<SearchAxes, 'modelIds'> {
  const { lens, sensor, accelerator } = deviceClass;
  const stops = lens.fNumberStops;
  const fNumbers = options.fNumbers ? stops.filter((s) => options.fNumbers!.some((f) => Math.abs(f - s) <= 1e-9 * s)) : [...stops];
  const framePeriodUs = sToUs(1 / task.frameRateHz);
  const exposuresUs = options.exposuresUs
    ? clampList(options.exposuresUs, 0, Infinity)
    : geometricLadder(Math.min(resolved.minExposureUs, framePeriodUs), framePeriodUs, resolved.exposureStepsPerOctave, 1);
  const analogGains = options.analogGains ? clampList(options.analogGains, 1, sensor.maxAnalogGain) : gainLadder(sensor.maxAnalogGain);
  const issues: InputIssue[] = [];
  if (fNumbers.length === 0) issues.push({ path: 'options.fNumbers', message: `none of these is a stop of the lens (${stops.join(', ')})` });
  if (analogGains.length === 0) issues.push({ path: 'options.analogGains', message: `none lies between 1 and the sensor's maximum gain ${sensor.maxAnalogGain}` });
  if (issues.length > 0) throw new InputError('plan options leave nothing to search', issues, 'plan options');
  return {
    focusDistancesM: focusAxisM(task, deviceClass, resolved.focusSpread),
    fNumbers,
    exposuresUs,
    analogGains,
    memoryPartitions: memoryPartitions(accelerator.sramKib, resolved.granuleKib, resolved.everyActivationSize),
  };
}
