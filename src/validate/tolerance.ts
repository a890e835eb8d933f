import type { Model } from '../schema/index.js';

/** Blur tolerated when the model has no accuracy-vs-blur curve: two pixels (common practice: one to two pixel pitches). */
export const DEFAULT_TOLERATED_BLUR_PX = 2;

interface Point {
  x: number;
  y: number;
}

/**
 * Piecewise-linear interpolation over points in increasing x; outside the points the nearest end value is
 * held, and `outside` says so (the curve says nothing there).
 */
export function interpolate(points: readonly Point[], x: number): { y: number; outside: 'below' | 'above' | null } {
  const first = points[0]!;
  const last = points[points.length - 1]!;
  if (x <= first.x) return { y: first.y, outside: x < first.x ? 'below' : null };
  if (x >= last.x) return { y: last.y, outside: x > last.x ? 'above' : null };
  let i = 1;
  while (points[i]!.x < x) i++;
  const a = points[i - 1]!;
  const b = points[i]!;
  return { y: a.y + ((x - a.x) / (b.x - a.x)) * (b.y - a.y), outside: null };
}

export type BlurCurve = NonNullable<Model['accuracyVsBlur']>;
export type SnrCurve = NonNullable<Model['accuracyVsSnr']>;

export function accuracyAtBlur(curve: BlurCurve, blurPx: number) {
  return interpolate(curve.map((p) => ({ x: p.blurPx, y: p.accuracy })), blurPx);
}

export function accuracyAtSnr(curve: SnrCurve, snrDb: number) {
  return interpolate(curve.map((p) => ({ x: p.snrDb, y: p.accuracy })), snrDb);
}

export interface BlurTolerance {
  blurPx: number;
  /** How the tolerance was found, for messages. */
  basis: string;
}

/**
 * The largest blur at which the model's (linearly interpolated) accuracy is still at least `minAccuracy`.
 * The curve is not extrapolated: when even its last point meets the accuracy, the last point's blur is the
 * tolerance. When no point meets it, the tolerance is 0 px. Without a curve, DEFAULT_TOLERATED_BLUR_PX.
 */
export function toleratedBlurPx(model: Pick<Model, 'accuracyVsBlur'>, minAccuracy: number): BlurTolerance {
  const curve = model.accuracyVsBlur;
  if (!curve) return { blurPx: DEFAULT_TOLERATED_BLUR_PX, basis: 'default 2 px: the model has no accuracy-vs-blur curve' };
  const last = curve[curve.length - 1]!;
  if (last.accuracy >= minAccuracy) {
    return { blurPx: last.blurPx, basis: `the model's curve still meets accuracy ${minAccuracy} at its last point` };
  }
  // Walk back from the blurriest point to the last crossing from "meets" to "misses".
  for (let i = curve.length - 2; i >= 0; i--) {
    const a = curve[i]!;
    const b = curve[i + 1]!;
    if (a.accuracy >= minAccuracy) {
      const blurPx = a.blurPx + ((minAccuracy - a.accuracy) / (b.accuracy - a.accuracy)) * (b.blurPx - a.blurPx);
      return { blurPx, basis: `where the model's accuracy-vs-blur curve falls to ${minAccuracy}` };
    }
  }
  return { blurPx: 0, basis: `the model's accuracy-vs-blur curve never reaches ${minAccuracy}` };
}
