/**
 * Where to focus for a working range. The closed form s = 2ab/(a+b) (harmonic mean of the near and far
 * distances) equalises the thin-lens defocus blur at both ends; a golden-section search then refines it
 * against whatever worst-blur figure the caller measures (diffraction included), and the result is held
 * at or beyond the lens's nearest focus.
 */
import { focusForRangeMm } from '../physics/optics.js';
import { mToMm, mmToM } from '../physics/units.js';

/** 1/φ, the golden-section step (Kiefer, "Sequential minimax search for a maximum", 1953). */
const INV_PHI = (Math.sqrt(5) - 1) / 2;

/**
 * Minimise a unimodal function on [lo, hi] by golden-section search (Kiefer 1953); returns the best
 * point seen, including both ends. `iterations` bounds the work; the bracket shrinks by 0.618 each step.
 */
export function goldenSectionMin(f: (x: number) => number, lo: number, hi: number, iterations = 40): { x: number; value: number } {
  let a = lo;
  let b = hi;
  let c = b - INV_PHI * (b - a);
  let d = a + INV_PHI * (b - a);
  let fc = f(c);
  let fd = f(d);
  let best = fc <= fd ? { x: c, value: fc } : { x: d, value: fd };
  for (let i = 0; i < iterations && b - a > 1e-12 * Math.max(1, Math.abs(b)); i++) {
    if (fc <= fd) {
      b = d;
      d = c;
      fd = fc;
      c = b - INV_PHI * (b - a);
      fc = f(c);
      if (fc < best.value) best = { x: c, value: fc };
    } else {
      a = c;
      c = d;
      fc = fd;
      d = a + INV_PHI * (b - a);
      fd = f(d);
      if (fd < best.value) best = { x: d, value: fd };
    }
  }
  for (const x of [lo, hi]) {
    const v = f(x);
    if (v < best.value) best = { x, value: v };
  }
  return best;
}

/** The closed-form starting focus for a working range, in metres, held at or beyond the nearest focus. */
export function startingFocusM(nearDistanceM: number, farDistanceM: number, nearestFocusM: number): number {
  return Math.max(nearestFocusM, mmToM(focusForRangeMm(mToMm(nearDistanceM), mToMm(farDistanceM))));
}

/**
 * Refine the focus by golden-section search on `worstBlurPx(focusM)` over [max(near, nearest focus), far],
 * starting from the closed form. Returns whichever of the two is better (the start on ties), so the
 * refinement can never make the worst blur larger.
 */
export function refinedFocusM(
  nearDistanceM: number,
  farDistanceM: number,
  nearestFocusM: number,
  worstBlurPx: (focusM: number) => number,
): { focusM: number; worstBlurPx: number } {
  const start = startingFocusM(nearDistanceM, farDistanceM, nearestFocusM);
  const startBlur = worstBlurPx(start);
  const lo = Math.max(nearDistanceM, nearestFocusM);
  const hi = Math.max(lo, farDistanceM);
  if (!(hi > lo)) return { focusM: start, worstBlurPx: startBlur };
  const found = goldenSectionMin(worstBlurPx, lo, hi);
  return found.value < startBlur ? { focusM: found.x, worstBlurPx: found.value } : { focusM: start, worstBlurPx: startBlur };
}
