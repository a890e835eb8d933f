/**
 * The value ladders the planner walks: exposure times, analog gains and memory partitions.
 * Pure functions of plain numbers; every ladder is sorted ascending and free of duplicates.
 */

/** Values equal to within this relative amount are the same rung. */
const SAME_RUNG = 1e-9;

function pushDistinct(out: number[], value: number): void {
  const last = out[out.length - 1];
  if (last === undefined || Math.abs(value - last) > SAME_RUNG * Math.max(1, Math.abs(value))) out.push(value);
}

/**
 * A geometric ladder from `minValue` to `maxValue`, `stepsPerOctave` rungs per doubling, always
 * ending exactly on `maxValue` (a shutter ladder in fractions of a stop; common practice).
 * Rungs are rounded to whole units of `roundTo` (0 keeps them exact).
 */
export function geometricLadder(minValue: number, maxValue: number, stepsPerOctave: number, roundTo = 0): number[] {
  if (!(minValue > 0) || !(maxValue >= minValue) || !(stepsPerOctave > 0)) {
    throw new RangeError(`geometric ladder needs 0 < min ≤ max and steps > 0 (got ${minValue}, ${maxValue}, ${stepsPerOctave})`);
  }
  const ratio = 2 ** (1 / stepsPerOctave);
  const out: number[] = [];
  for (let v = minValue; v < maxValue * (1 - SAME_RUNG); v *= ratio) {
    pushDistinct(out, roundTo > 0 ? Math.max(roundTo, Math.round(v / roundTo) * roundTo) : v);
  }
  pushDistinct(out, maxValue);
  return out;
}

/** Analog gains 1, 2, 4 … up to the sensor's maximum, with the maximum itself as the last rung. */
export function gainLadder(maxAnalogGain: number): number[] {
  const out: number[] = [];
  for (let g = 1; g < maxAnalogGain * (1 - SAME_RUNG); g *= 2) out.push(g);
  pushDistinct(out, Math.max(1, maxAnalogGain));
  return out;
}

/** Keep the values inside [lo, hi], sorted and distinct. */
export function clampList(values: readonly number[], lo: number, hi: number): number[] {
  const out: number[] = [];
  for (const v of [...values].filter((x) => x >= lo - SAME_RUNG && x <= hi + SAME_RUNG).sort((a, b) => a - b)) pushDistinct(out, v);
  return out;
}

export interface MemoryPartitionKib {
  weightBufferKib: number;
  activationBufferKib: number;
}

/**
 * Splits of the accelerator's on-chip SRAM: the weight buffer in steps of `granuleKib` from 0 up to the
 * whole SRAM, the activation buffer taking the rest. With `everyActivationSize` the activation buffer also
 * takes every smaller whole number of granules (down to one), for accelerators where a smaller buffer pays.
 */
export function memoryPartitions(sramKib: number, granuleKib: number, everyActivationSize = false): MemoryPartitionKib[] {
  if (!(granuleKib > 0)) throw new RangeError(`memory granule must be more than 0 KiB (got ${granuleKib})`);
  const out: MemoryPartitionKib[] = [];
  const weights: number[] = [];
  for (let w = 0; w < sramKib - SAME_RUNG; w += granuleKib) weights.push(w);
  weights.push(sramKib);
  for (const weightBufferKib of weights) {
    const rest = sramKib - weightBufferKib;
    out.push({ weightBufferKib, activationBufferKib: rest });
    if (!everyActivationSize) continue;
    const whole = Math.floor(rest / granuleKib - SAME_RUNG);
    for (let k = whole; k >= 1; k--) out.push({ weightBufferKib, activationBufferKib: k * granuleKib });
  }
  return out;
}
