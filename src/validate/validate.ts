import { worstStatus } from '../schema/index.js';
import type { Check, Report } from '../schema/index.js';
import { computeChecks } from './compute-checks.js';
import type { InferenceFigures } from './compute-checks.js';
import type { ValidateOptions, ValidationInput } from './input.js';
import { blurCurveOf, chainAt, imageSetup, workingFNumberAt, worstPoint } from './image-model.js';
import type { BlurPoint } from './image-model.js';
import { accuracyCheck, consistencyChecks, modelTaskCheck, physicalLimitChecks } from './model-checks.js';
import { blurOverRangeCheck, depthOfFieldFigures, motionBlurCheck, pixelsOnFeatureCheck, rollingShutterSkewCheck } from './optical-checks.js';
import { costedInput, networkWeightsChecks } from './network-weights.js';
import { clippingBrightCheck, exposureFitsFrameCheck, snrDarkCheck } from './signal-checks.js';
import { curvesFor, toleratedBlurPx } from './tolerance.js';
import type { BlurUnit } from '../schema/index.js';
import { diffractionCutoffCycPerMm, mtf50CycPerMm, mtfCurve, nyquistCycPerMm, systemMtf } from '../physics/mtf.js';
import { objectPixelSizeMm } from '../physics/optics.js';
import { mToMm, umToMm } from '../physics/units.js';
import type { MtfParts } from '../physics/mtf.js';

/** Figures the checks were computed from, for plots (JSON writes an infinite blur as null). */
export type ValidationFigures = {
  blurCurve: BlurPoint[];
  /** The worst point of the range and the MTF there (frequencies on the sensor, cycles/mm, up to its Nyquist). */
  worstBlur: BlurPoint;
  mtfAtWorst: (MtfParts & { cycPerMm: number })[];
  workingFNumber: number;
  downscale: number;
  /** MTF50 of the system at the worst point, cycles/mm on the sensor. */
  mtf50CycPerMm: number;
  /**
   * The feature read as a bar of a square wave at the far end (half a cycle across it), cycles/mm on the sensor,
   * the system MTF there at the worst point, and the contrast left of the task's featureContrast (null without it).
   */
  featureCycPerMm: number;
  mtfAtFeature: number;
  featureImageContrast: number | null;
  toleratedBlurPx: number;
  toleratedBlurUnit: BlurUnit;
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
  const { task, deviceClass, model, profile } = input;
  const tolerance = toleratedBlurPx(curvesFor(model, task.id), task.minAccuracy);
  const setup = imageSetup(task, deviceClass, profile.camera.exposureUs, model.inputWidthPx);
  const { fNumber, focusDistanceM } = profile.camera;
  const curve = blurCurveOf(task, setup, fNumber, focusDistanceM);
  const worst = worstPoint(curve);
  const workingF = workingFNumberAt(setup, fNumber, focusDistanceM);
  const worstChain = chainAt(setup, fNumber, focusDistanceM, worst.distanceM, diffractionCutoffCycPerMm(setup.wavelengthNm, workingF));
  // Image of the feature at the far end, where it is smallest: size × f/d (pinhole), as pixels × pitch.
  const featureImageMm = (task.featureSizeMm / objectPixelSizeMm(mToMm(task.farDistanceM), deviceClass.sensor.pixelPitchUm, deviceClass.lens.focalLengthMm)) * umToMm(deviceClass.sensor.pixelPitchUm);
  const featureCycPerMm = 1 / (2 * featureImageMm);
  const mtfAtFeature = Number.isFinite(worstChain.defocusBlurUm) ? systemMtf(featureCycPerMm, worstChain) : 0;
  const dark = snrDarkCheck(input);
  const compute = computeChecks(costedInput(input), options.calibration);
  const accuracy = accuracyCheck(input, worst, dark.snrDb);
  const dof = depthOfFieldFigures(input, tolerance);

  const checks: Check[] = [
    ...physicalLimitChecks(input),
    ...consistencyChecks(input),
    ...networkWeightsChecks(input),
    modelTaskCheck(input),
    blurOverRangeCheck(input, setup, curve, tolerance),
    pixelsOnFeatureCheck(input),
    motionBlurCheck(input, setup, tolerance),
    rollingShutterSkewCheck(input),
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
      worstBlur: worst,
      mtfAtWorst: Number.isFinite(worstChain.defocusBlurUm) ? mtfCurve(worstChain, nyquistCycPerMm(setup.pixelPitchUm)) : [],
      workingFNumber: workingF,
      downscale: setup.downscale,
      mtf50CycPerMm: Number.isFinite(worstChain.defocusBlurUm) ? mtf50CycPerMm(worstChain) : 0,
      featureCycPerMm,
      mtfAtFeature,
      featureImageContrast: task.featureContrast !== undefined ? task.featureContrast * mtfAtFeature : null,
      toleratedBlurPx: tolerance.blurPx,
      toleratedBlurUnit: tolerance.unit,
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
