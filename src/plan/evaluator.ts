/**
 * The allocation-free evaluator: one candidate's feasibility, objectives and failing codes from the
 * precomputed tables, by the validator's rules (a figure fails when it is not within its limit, so an
 * unknown figure fails too). A candidate is a position on each axis, packed into one index.
 */
import { BIT, overshootAbove, overshootBelow } from './codes.js';
import type { PlanTables } from './tables.js';

/** A candidate's position on each axis. */
export interface AxisPosition {
  m: number;
  p: number;
  e: number;
  f: number;
  s: number;
  g: number;
}

/** Reused output of `evaluateAt`; NaN accuracy means "not predicted". */
export interface Evaluation {
  mask: number;
  /** Sum of the overshoots past each failed limit (0 when feasible); ranks near misses. */
  overshoot: number;
  energyMjPerFrame: number;
  latencyMs: number;
  predictedAccuracy: number;
  worstBlurPx: number;
}

export function newEvaluation(): Evaluation {
  return { mask: 0, overshoot: 0, energyMjPerFrame: 0, latencyMs: 0, predictedAccuracy: NaN, worstBlurPx: 0 };
}

export function candidateCount(t: PlanTables): number {
  return t.M * t.P * t.E * t.F * t.S * t.G;
}

/** Index order: model, partition, exposure, f-number, focus, gain (gain varies fastest). */
export function packIndex(t: PlanTables, at: AxisPosition): number {
  return ((((at.m * t.P + at.p) * t.E + at.e) * t.F + at.f) * t.S + at.s) * t.G + at.g;
}

export function unpackIndex(t: PlanTables, index: number): AxisPosition {
  let rest = index;
  const g = rest % t.G;
  rest = (rest - g) / t.G;
  const s = rest % t.S;
  rest = (rest - s) / t.S;
  const f = rest % t.F;
  rest = (rest - f) / t.F;
  const e = rest % t.E;
  rest = (rest - e) / t.E;
  const p = rest % t.P;
  const m = (rest - p) / t.P;
  return { m, p, e, f, s, g };
}

/** Evaluate the candidate at (m, p, e, f, s, g) into `out`. */
export function evaluateAt(t: PlanTables, m: number, p: number, e: number, f: number, s: number, g: number, out: Evaluation): void {
  const task = t.task;
  let mask = 0;
  let overshoot = 0;

  const featurePx = t.pixelsOnFeaturePx[m]!;
  if (!(featurePx >= task.pixelsPerFeatureMin)) {
    mask |= BIT['pixels-on-feature'];
    overshoot += overshootBelow(featurePx, task.pixelsPerFeatureMin);
  }
  const fse = (f * t.S + s) * t.E + e;
  const blurPx = t.worstBlurPx[fse]!;
  const mfse = m * t.F * t.S * t.E + fse;
  const modelBlurPx = t.modelBlurPx[mfse]!;
  const tolerated = t.toleratedBlurPx[m]!;
  if (!(modelBlurPx <= tolerated)) {
    mask |= BIT['blur-over-range'];
    overshoot += overshootAbove(modelBlurPx, tolerated);
  }
  const motionPx = t.motionBlurPx[e]!;
  const motionLimit = t.motionLimitPx[m]!;
  if (!(motionPx <= motionLimit)) {
    mask |= BIT['motion-blur'];
    overshoot += overshootAbove(motionPx, motionLimit);
  }
  const fseg = fse * t.G + g;
  const snrDb = t.snrDarkDb[fseg]!;
  if (!(snrDb >= task.minSnrDb)) {
    mask |= BIT['snr-dark'];
    overshoot += overshootBelow(snrDb, task.minSnrDb);
  }
  const clipping = t.clippingPercent[fseg]!;
  if (!(clipping < 100)) {
    mask |= BIT['clipping-bright'];
    overshoot += Number.isNaN(clipping) ? 10 : overshootAbove(clipping, 100);
  }
  const exposureUs = t.axes.exposuresUs[e]!;
  if (!(exposureUs <= t.framePeriodUs)) {
    mask |= BIT['exposure-fits-frame'];
    overshoot += overshootAbove(exposureUs, t.framePeriodUs);
  }
  const mpe = (m * t.P + p) * t.E + e;
  const latencyMs = t.latencyMs[mpe]!;
  if (!(latencyMs <= task.latencyBudgetMs)) {
    mask |= BIT.latency;
    overshoot += overshootAbove(latencyMs, task.latencyBudgetMs);
  }
  const energyMj = t.energyMj[mpe]!;
  if (!(energyMj <= task.energyBudgetMjPerFrame)) {
    mask |= BIT['energy-per-frame'];
    overshoot += overshootAbove(energyMj, task.energyBudgetMjPerFrame);
  }
  const powerW = t.averagePowerW[mpe]!;
  const powerBudgetW = t.deviceClass.platform.powerBudgetW;
  if (!(powerW <= powerBudgetW)) {
    mask |= BIT['average-power'];
    overshoot += overshootAbove(powerW, powerBudgetW);
  }
  const busiestMs = t.busiestStageMs[mpe]!;
  if (!(busiestMs <= t.framePeriodMs)) {
    mask |= BIT.throughput;
    overshoot += overshootAbove(busiestMs, t.framePeriodMs);
  }
  // Predicted accuracy: the lower of the accuracy at the worst blur and at the dark-scene SNR, where known.
  const byBlur = t.accuracyAtBlur[mfse]!;
  const bySnr = t.accuracyAtSnr[m * t.F * t.S * t.E * t.G + fseg]!;
  const accuracy = Number.isNaN(byBlur) ? bySnr : Number.isNaN(bySnr) ? byBlur : bySnr < byBlur ? bySnr : byBlur;
  // A blur beyond the measured curve fails accuracy, as in the validator: the curve says nothing there.
  if ((!Number.isNaN(accuracy) && !(accuracy >= task.minAccuracy)) || (!Number.isNaN(byBlur) && modelBlurPx > t.curveEndPx[m]!)) {
    mask |= BIT.accuracy;
    overshoot += overshootBelow(accuracy, task.minAccuracy);
  }

  out.mask = mask;
  out.overshoot = overshoot;
  out.energyMjPerFrame = energyMj;
  out.latencyMs = latencyMs;
  out.predictedAccuracy = accuracy;
  out.worstBlurPx = blurPx;
}

/** Evaluate the candidate with a packed index into `out`. */
export function evaluateIndex(t: PlanTables, index: number, out: Evaluation): void {
  const at = unpackIndex(t, index);
  evaluateAt(t, at.m, at.p, at.e, at.f, at.s, at.g, out);
}
