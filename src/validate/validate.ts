import { worstStatus } from '../schema/index.js';
import type { Check, Report } from '../schema/index.js';
import { computeChecks } from './compute-checks.js';
import type { InferenceFigures } from './compute-checks.js';
import type { ValidateOptions, ValidationInput } from './input.js';
import { accuracyCheck, consistencyChecks, physicalLimitChecks } from './model-checks.js';
import { blurCurve, blurOverRangeCheck, depthOfFieldFigures, motionBlurCheck, pixelsOnFeatureCheck, worstPoint } from './optical-checks.js';
import type { BlurPoint } from './optical-checks.js';
import { clippingBrightCheck, exposureFitsFrameCheck, snrDarkCheck } from './signal-checks.js';
import { toleratedBlurPx } from './tolerance.js';

/** Figures the checks were computed from, for plots (JSON writes an infinite blur as null). */
export type ValidationFigures = {
  blurCurve: BlurPoint[];
  toleratedBlurPx: number;
  cocMm: number;
  latency: { exposureMs: number; readoutMs: number; ispMs: number; inferenceMs: number; totalMs: number } | null;
  energy: { readoutMj: number; ispMj: number; inferenceMj: number; lightMj: number; idleMj: number; totalMj: number } | null;
  averagePowerW: number | null;
  throughput: { framePeriodMs: number; sensorMs: number; ispMs: number; inferenceMs: number; busiestMs: number; busiest: string } | null;
  predictedAccuracy: number | null;
  snrDarkDb: number | null;
  hyperfocalM: number | null;
  dofNearM: number | null;
  dofFarM: number | null;
  inference: InferenceFigures | null;
};

export type ValidationReport = Report & { figures: ValidationFigures };

/**
 * Check a profile against its task, device class, model and network. Never throws: every finding,
 * including settings the hardware cannot take, comes back as a check.
 */
export function validate(input: ValidationInput, options: ValidateOptions = {}): ValidationReport {
  const tolerance = toleratedBlurPx(input.model, input.task.minAccuracy);
  const curve = blurCurve(input);
  const worst = worstPoint(curve);
  const dark = snrDarkCheck(input);
  const compute = computeChecks(input, options.calibration);
  const accuracy = accuracyCheck(input, worst.totalPx, dark.snrDb);
  const dof = depthOfFieldFigures(input, tolerance);

  const checks: Check[] = [
    ...physicalLimitChecks(input),
    ...consistencyChecks(input),
    blurOverRangeCheck(input, curve, tolerance),
    pixelsOnFeatureCheck(input),
    motionBlurCheck(input, tolerance),
    dark.check,
    clippingBrightCheck(input),
    exposureFitsFrameCheck(input),
    ...compute.checks,
    accuracy.check,
  ];
  const budget = compute.budget;
  return {
    status: worstStatus(checks.map((c) => c.status)),
    checks,
    figures: {
      blurCurve: curve,
      toleratedBlurPx: tolerance.blurPx,
      cocMm: dof.cocMm,
      latency: budget ? { ...budget.latency } : null,
      energy: budget ? { readoutMj: budget.energy.readoutMj, ispMj: budget.energy.ispMj, inferenceMj: budget.energy.inferenceMj, lightMj: budget.energy.lightMj, idleMj: budget.energy.idleMj, totalMj: budget.energy.totalMj } : null,
      averagePowerW: budget ? budget.averagePowerW : null,
      throughput: budget ? { ...budget.throughput } : null,
      predictedAccuracy: accuracy.predicted,
      snrDarkDb: dark.snrDb !== null && Number.isFinite(dark.snrDb) ? dark.snrDb : null,
      hyperfocalM: dof.hyperfocalM,
      dofNearM: dof.dofNearM,
      dofFarM: dof.dofFarM,
      inference: compute.inference,
    },
  };
}
