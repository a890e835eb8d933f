import { depthOfFieldMm, focusForRangeMm, hyperfocalDistanceMm, objectPixelSizeMm } from '../physics/optics.js';
import { rollingReadoutUs, smearPx } from '../physics/motion.js';
import { mToMm, mmToM, umToMm, usToMs } from '../physics/units.js';
import type { Check } from '../schema/index.js';
import { againstMax, againstMin, fmt, makeCheck } from './check.js';
import { blurCurveOf, cameraMotion, downscaleFactor, lineTimeUs as lineTimeOf, rollingSkewPx, worstPoint } from './image-model.js';
import type { BlurPoint, ImageSetup } from './image-model.js';
import type { ValidationInput } from './input.js';
import { blurIn, unitLabel } from './tolerance.js';
import type { BlurTolerance } from './tolerance.js';

/** The worst point's figures, both pixel units, for a check's `figures`. */
export function worstFigures(worst: BlurPoint): Record<string, number | null> {
  const f = (v: number) => (Number.isFinite(v) ? v : null);
  return {
    distanceM: worst.distanceM,
    combinedSensorPx: f(worst.totalPx),
    combinedInputPx: f(worst.totalInputPx),
    defocusPx: f(worst.defocusPx),
    diffractionPx: f(worst.diffractionPx),
    pixelPx: f(worst.pixelPx),
    motionPx: f(worst.motionPx),
  };
}

/**
 * The combined blur (defocus, diffraction, pixel aperture and motion, as one MTF) at the worst point of the
 * working range, against the blur the model tolerates, in the tolerance's own pixels.
 */
export function blurOverRangeCheck(input: ValidationInput, setup: ImageSetup, curve: BlurPoint[], tolerance: BlurTolerance): Check {
  const worst = worstPoint(curve);
  const unit = unitLabel(tolerance.unit);
  const actual = blurIn(tolerance.unit, worst.totalPx, worst.totalInputPx);
  const limit = tolerance.blurPx;
  const { task, profile } = input;
  const figures = worstFigures(worst);
  const check = (status: 'pass' | 'fail', path: string, message: string) => ({ ...makeCheck('blur-over-range', status, actual, limit, unit, path, message), figures });
  const v = againstMax(actual, limit, unit, 'the {} the model tolerates');
  const parts = `defocus ${fmt(worst.defocusPx)}, diffraction ${fmt(worst.diffractionPx)}, pixel ${fmt(worst.pixelPx)}, motion ${fmt(worst.motionPx)} sensor px`;
  const both = setup.downscale > 1
    ? `${fmt(worst.totalPx)} sensor px = ${fmt(worst.totalInputPx)} input px after the ×${fmt(setup.downscale)} downscale`
    : `${fmt(worst.totalPx)} sensor px (the network takes the sensor's pixels as they are)`;
  const range = `range ${fmt(task.nearDistanceM)}–${fmt(task.farDistanceM)} m, focus ${fmt(profile.camera.focusDistanceM)} m`;
  const head = `worst combined blur ${both} at ${fmt(worst.distanceM)} m (${parts}; ${range}) ${v.text}; tolerance from ${tolerance.basis}`;
  if (v.ok) return check('pass', 'camera.focusDistanceM', head);
  if (limit <= 0) return check('fail', 'modelId', `${head}: no camera setting can help`);
  const toUnit = (sensorPx: number) => blurIn(tolerance.unit, sensorPx, sensorPx / setup.downscale);
  if (toUnit(worst.diffractionPx) > limit) {
    return check('fail', 'camera.fNumber', `${head}. Diffraction alone at f/${profile.camera.fNumber} exceeds the tolerance: a wider aperture is needed`);
  }
  if (toUnit(worst.motionPx) > limit || worst.motionPx > worst.defocusPx) {
    return check('fail', 'camera.exposureUs', `${head}. Motion during the ${fmt(profile.camera.exposureUs)} µs exposure is the largest part: a shorter exposure is needed`);
  }
  const bestFocusM = mmToM(focusForRangeMm(mToMm(task.nearDistanceM), mToMm(task.farDistanceM)));
  const best = worstPoint(blurCurveOf(task, setup, profile.camera.fNumber, bestFocusM));
  const bestActual = blurIn(tolerance.unit, best.totalPx, best.totalInputPx);
  if (bestActual > limit) {
    return check('fail', 'camera.fNumber',
      `${head}. ${sameFocus(bestFocusM, profile.camera.focusDistanceM) ? 'That focus already balances the defocus at both ends' : `Even focused at ${fmt(bestFocusM)} m, which balances the defocus at both ends, the worst blur is ${fmt(bestActual)} ${unit}`}: the depth of field at f/${profile.camera.fNumber} cannot cover the range, a narrower aperture is needed`);
  }
  return check('fail', 'camera.focusDistanceM', `${head}. Focusing at ${fmt(bestFocusM)} m would bring the worst blur to ${fmt(bestActual)} ${unit}`);
}

function sameFocus(aM: number, bM: number): boolean {
  return Math.abs(aM - bM) <= 0.01 * Math.max(aM, bM);
}

export function pixelsOnFeatureCheck(input: ValidationInput): Check {
  const { task, deviceClass, model } = input;
  const { lens, sensor } = deviceClass;
  const footprintMm = objectPixelSizeMm(mToMm(task.farDistanceM), sensor.pixelPitchUm, lens.focalLengthMm);
  const sensorPx = task.featureSizeMm / footprintMm;
  const downscaled = sensor.widthPx > model.inputWidthPx;
  const scale = downscaled ? model.inputWidthPx / sensor.widthPx : 1;
  const networkPx = sensorPx * scale;
  const v = againstMin(networkPx, task.pixelsPerFeatureMin, 'px', 'the task minimum of {}');
  const seen = downscaled
    ? `, and ${fmt(networkPx)} px in the network's input after downscaling ${sensor.widthPx} → ${model.inputWidthPx} px wide (×${fmt(scale)})`
    : ` (the network's ${model.inputWidthPx} px input takes the sensor's ${sensor.widthPx} px without downscaling)`;
  const message = `a ${fmt(task.featureSizeMm)} mm feature at the far end ${fmt(task.farDistanceM)} m spans ${fmt(sensorPx)} sensor px (${fmt(footprintMm)} mm per pixel)${seen}; that ${v.text}`;
  const path = !v.ok && downscaled && sensorPx >= task.pixelsPerFeatureMin ? 'modelId' : 'deviceClassId';
  return makeCheck('pixels-on-feature', v.ok ? 'pass' : 'fail', networkPx, task.pixelsPerFeatureMin, 'px', path, message);
}

/**
 * Motion on its own, so users see where the blur comes from: the smear length at the near end from translation,
 * yaw and pitch during the exposure (plus one line time for a rolling shutter), sensor px.
 */
export function motionBlurCheck(input: ValidationInput, setup: ImageSetup, tolerance: BlurTolerance): Check {
  const { task, profile } = input;
  const px = smearPx(setup.motion, setup.smearTimeUs, setup.focalLengthMm, task.nearDistanceM, setup.pixelPitchUm);
  // The model's tolerance in sensor px: an input pixel covers `downscale` sensor pixels.
  const tolerancePx = tolerance.unit === 'input-px' ? tolerance.blurPx * setup.downscale : tolerance.blurPx;
  const limit = task.maxMotionBlurPx ?? tolerancePx;
  const limitBasis = task.maxMotionBlurPx !== undefined ? "the task's motion-blur limit of {}" : 'the {} the model tolerates';
  const v = againstMax(px, limit, 'px', limitBasis);
  const turns = task.maxYawRateDegPerS > 0 || task.maxPitchRateDegPerS > 0 ? `, turning ${fmt(task.maxYawRateDegPerS)} °/s yaw and ${fmt(task.maxPitchRateDegPerS)} °/s pitch` : '';
  const message = `motion blur ${fmt(px)} sensor px (${fmt(px / setup.downscale)} input px) at the near end ${fmt(task.nearDistanceM)} m (${fmt(task.maxRelativeSpeedMPerS)} m/s${turns}, ${fmt(profile.camera.exposureUs)} µs exposure) ${v.text}`;
  return { ...makeCheck('motion-blur', v.ok ? 'pass' : 'fail', px, limit, 'px', 'camera.exposureUs', message), figures: { sensorPx: px, inputPx: px / setup.downscale } };
}

/**
 * Rolling-shutter skew: the image moves while the rows are read out one after another, shearing the frame. It
 * distorts geometry rather than blurring, so it is its own figure; warned above the task's limit, by default the
 * feature's own size in sensor pixels at the near end.
 */
export function rollingShutterSkewCheck(input: ValidationInput): Check {
  const { task, deviceClass } = input;
  const { lens, sensor } = deviceClass;
  if (sensor.shutter !== 'rolling') {
    return { ...makeCheck('rolling-shutter-skew', 'pass', 0, null, 'px', 'deviceClassId', `global shutter: every row is exposed at once, no skew (device class ${deviceClass.id})`), figures: { skewPx: 0 } };
  }
  const skew = rollingSkewPx(task, deviceClass, task.nearDistanceM);
  const featurePx = task.featureSizeMm / objectPixelSizeMm(mToMm(task.nearDistanceM), sensor.pixelPitchUm, lens.focalLengthMm);
  const limit = task.maxRollingSkewPx ?? featurePx;
  const basis = task.maxRollingSkewPx !== undefined ? "the task's skew limit of {}" : `the feature's own size at the near end, {}`;
  const v = againstMax(skew, limit, 'px', basis);
  const moving = cameraMotion(task);
  const message = `rolling shutter: the last row starts ${fmt(lineTimeMs(sensor))} ms after the first, and the image moves ${fmt(skew)} sensor px top to bottom at the near end ${fmt(task.nearDistanceM)} m (${fmt(moving.speedMPerS)} m/s, ${fmt(moving.yawRateDegPerS)} °/s yaw, ${fmt(moving.pitchRateDegPerS)} °/s pitch); that ${v.text}. Skew bends straight edges rather than blurring them`;
  return { ...makeCheck('rolling-shutter-skew', v.ok ? 'pass' : 'warn', skew, limit, 'px', 'deviceClassId', message), figures: { skewPx: skew, featurePx } };
}

function lineTimeMs(sensor: ValidationInput['deviceClass']['sensor']): number {
  return usToMs(rollingReadoutUs(lineTimeOf(sensor), sensor.heightPx));
}

export interface DepthOfFieldFigures {
  cocMm: number;
  hyperfocalM: number | null;
  dofNearM: number | null;
  /** null when the far limit is at infinity. */
  dofFarM: number | null;
}

/** Depth of field for a circle of confusion equal to the tolerated blur (in pixels) times the pixel pitch. */
export function depthOfFieldFigures(input: ValidationInput, tolerance: BlurTolerance): DepthOfFieldFigures {
  const { lens, sensor } = input.deviceClass;
  const { fNumber, focusDistanceM } = input.profile.camera;
  const tolerancePx = tolerance.unit === 'input-px' ? tolerance.blurPx * downscaleFactor(sensor.widthPx, input.model.inputWidthPx) : tolerance.blurPx;
  const cocMm = tolerancePx * umToMm(sensor.pixelPitchUm);
  const focusMm = mToMm(focusDistanceM);
  if (!(cocMm > 0) || !(focusMm > lens.focalLengthMm)) return { cocMm, hyperfocalM: null, dofNearM: null, dofFarM: null };
  const dof = depthOfFieldMm(lens.focalLengthMm, fNumber, cocMm, focusMm);
  return {
    cocMm,
    hyperfocalM: mmToM(hyperfocalDistanceMm(lens.focalLengthMm, fNumber, cocMm)),
    dofNearM: mmToM(dof.nearMm),
    dofFarM: Number.isFinite(dof.farMm) ? mmToM(dof.farMm) : null,
  };
}
