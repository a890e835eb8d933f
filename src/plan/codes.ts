/**
 * The validator's check codes that a searched candidate can fail, as bits of a mask, so the inner loop
 * can record what failed without building checks. The planner's grid never leaves the lens's stops, the
 * sensor's gain range or the SRAM, and models of the wrong precision or network are skipped before the
 * search, so 'physical-limit', 'memory-fits-sram', 'model-network' and 'model-precision' have no bit.
 */
import type { CheckCode } from '../schema/report.js';

export const FAIL_CODES = [
  'pixels-on-feature',
  'blur-over-range',
  'motion-blur',
  'snr-dark',
  'clipping-bright',
  'exposure-fits-frame',
  'latency',
  'energy-per-frame',
  'average-power',
  'throughput',
  'accuracy',
] as const satisfies readonly CheckCode[];

export type FailCode = (typeof FAIL_CODES)[number];

export const BIT = Object.fromEntries(FAIL_CODES.map((c, i) => [c, 1 << i])) as Record<FailCode, number>;

/** Number of distinct masks. */
export const MASK_COUNT = 1 << FAIL_CODES.length;

/** Set bits of a mask (popcount). */
export function bitCount(mask: number): number {
  let n = 0;
  for (let m = mask; m !== 0; m &= m - 1) n++;
  return n;
}

/** The codes whose bits are set in a mask, in FAIL_CODES order. */
export function codesOf(mask: number): FailCode[] {
  return FAIL_CODES.filter((_, i) => (mask & (1 << i)) !== 0);
}

/**
 * How far past its limit a figure is, as a fraction of the limit (capped, so that one impossible figure
 * does not swamp the rest). Used only to rank infeasible candidates.
 */
export function overshootAbove(actual: number, limit: number): number {
  return Math.min(10, Math.max(0, (actual - limit) / Math.max(Math.abs(limit), 1e-12)));
}

export function overshootBelow(actual: number, limit: number): number {
  if (Number.isNaN(actual)) return 10;
  return Math.min(10, Math.max(0, (limit - actual) / Math.max(Math.abs(limit), 1)));
}
