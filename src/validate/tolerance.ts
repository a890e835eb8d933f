import type { BlurUnit, Model } from '../schema/index.js';

/**
 * Blur tolerated when the model has no accuracy-vs-blur curve: two pixels of the network's input (common practice:
 * a blur of one to two pixel pitches is the usual machine-vision tolerance, here applied where the network looks).
 */
export const DEFAULT_TOLERATED_BLUR_PX = 2;
export const DEFAULT_TOLERATED_BLUR_UNIT: BlurUnit = 'input-px';

/** The curves that apply to one task, and the pixels the blur curve is in. */
export interface TaskCurves {
  accuracyVsBlur: Model['accuracyVsBlur'];
  accuracyVsSnr: Model['accuracyVsSnr'];
  blurUnit: BlurUnit;
  /** The model did not declare its blur unit: sensor px assumed, as documents written before the field meant. */
  unitAssumed: boolean;
  /** The curves came from the model's per-task entry. */
  perTask: boolean;
}

/** The model's curves for a task: its per-task entry where it has one, else its own. */
export function curvesFor(model: Pick<Model, 'accuracyVsBlur' | 'accuracyVsSnr' | 'blurUnit' | 'taskCurves'>, taskId: string): TaskCurves {
  const entry = model.taskCurves?.find((c) => c.taskId === taskId);
  return {
    accuracyVsBlur: entry?.accuracyVsBlur ?? model.accuracyVsBlur,
    accuracyVsSnr: entry?.accuracyVsSnr ?? model.accuracyVsSnr,
    blurUnit: model.blurUnit ?? 'sensor-px',
    unitAssumed: model.blurUnit === undefined,
    perTask: entry !== undefined,
  };
}

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
  /** The pixels blurPx is in. */
  unit: BlurUnit;
  /** How the tolerance was found, for messages. */
  basis: string;
}

/** A blur figure in the tolerance's unit. */
export function blurIn(unit: BlurUnit, sensorPx: number, inputPx: number): number {
  return unit === 'input-px' ? inputPx : sensorPx;
}

/** Short label of a unit for messages. */
export function unitLabel(unit: BlurUnit): string {
  return unit === 'input-px' ? 'input px' : 'sensor px';
}

/**
 * The largest blur at which the model's (linearly interpolated) accuracy is still at least `minAccuracy`.
 * The curve is not extrapolated: when even its last point meets the accuracy, the last point's blur is the
 * tolerance. When no point meets it, the tolerance is 0 px. Without a curve, DEFAULT_TOLERATED_BLUR_PX.
 */
export function toleratedBlurPx(curves: { accuracyVsBlur?: BlurCurve | undefined; blurUnit?: BlurUnit | undefined; unitAssumed?: boolean }, minAccuracy: number): BlurTolerance {
  const curve = curves.accuracyVsBlur;
  if (!curve) {
    return { blurPx: DEFAULT_TOLERATED_BLUR_PX, unit: DEFAULT_TOLERATED_BLUR_UNIT, basis: 'the default 2 input px (common practice): the model has no accuracy-vs-blur curve' };
  }
  const unit = curves.blurUnit ?? 'sensor-px';
  const assumed = curves.unitAssumed ?? curves.blurUnit === undefined ? ' (the model does not declare blurUnit: read as sensor px, as older documents meant)' : '';
  const last = curve[curve.length - 1]!;
  if (last.accuracy >= minAccuracy) {
    return { blurPx: last.blurPx, unit, basis: `the model's curve still meets accuracy ${minAccuracy} at its last point${assumed}` };
  }
  // Walk back from the blurriest point to the last crossing from "meets" to "misses".
  for (let i = curve.length - 2; i >= 0; i--) {
    const a = curve[i]!;
    const b = curve[i + 1]!;
    if (a.accuracy >= minAccuracy) {
      const blurPx = a.blurPx + ((minAccuracy - a.accuracy) / (b.accuracy - a.accuracy)) * (b.blurPx - a.blurPx);
      return { blurPx, unit, basis: `where the model's accuracy-vs-blur curve falls to ${minAccuracy}${assumed}` };
    }
  }
  return { blurPx: 0, unit, basis: `the model's accuracy-vs-blur curve never reaches ${minAccuracy}${assumed}` };
}
