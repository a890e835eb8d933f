import {
  airyDiameterUm,
  blurCircleMm,
  depthOfFieldMm,
  focusForRangeMm,
  hyperfocalDistanceMm,
  objectPixelSizeMm,
  totalBlurPx,
} from '../physics/optics.js';
import { motionBlurPx } from '../physics/motion.js';
import { mToMm, mmToM, mmToUm, umToMm } from '../physics/units.js';
import type { Check } from '../schema/index.js';
import { againstMax, againstMin, fmt, makeCheck } from './check.js';
import type { ValidationInput } from './input.js';
import type { BlurTolerance } from './tolerance.js';

/** Distances sampled across the working range (plus both ends and the focus distance). */
export const BLUR_SAMPLES = 64;

export interface BlurPoint {
  distanceM: number;
  defocusPx: number;
  diffractionPx: number;
  totalPx: number;
}

/** Distances from near to far, evenly spaced in dioptres (1/d), where defocus blur changes linearly. */
export function sampleDistancesM(nearM: number, farM: number, focusM: number, samples = BLUR_SAMPLES): number[] {
  if (farM <= nearM) return [nearM];
  const out: number[] = [];
  for (let i = 0; i < samples; i++) {
    const dioptre = 1 / nearM + (i / (samples - 1)) * (1 / farM - 1 / nearM);
    out.push(i === samples - 1 ? farM : i === 0 ? nearM : 1 / dioptre);
  }
  if (focusM > nearM && focusM < farM) {
    const at = out.findIndex((d) => d >= focusM);
    if (out[at] !== focusM) out.splice(at, 0, focusM);
  }
  return out;
}

/** Total blur (defocus circle and Airy disk in quadrature) at each sampled distance. */
export function blurCurve(input: ValidationInput, focusM = input.profile.camera.focusDistanceM): BlurPoint[] {
  const { lens, sensor } = input.deviceClass;
  const { fNumber } = input.profile.camera;
  const airyUm = airyDiameterUm(sensor.designWavelengthNm, fNumber);
  const diffractionPx = airyUm / sensor.pixelPitchUm;
  const focusMm = mToMm(focusM);
  return sampleDistancesM(input.task.nearDistanceM, input.task.farDistanceM, focusM).map((distanceM) => {
    const defocusMm = blurCircleMm(lens.focalLengthMm, fNumber, focusMm, mToMm(distanceM));
    return {
      distanceM,
      defocusPx: mmToUm(defocusMm) / sensor.pixelPitchUm,
      diffractionPx,
      totalPx: totalBlurPx(defocusMm, airyUm, sensor.pixelPitchUm),
    };
  });
}

export function worstPoint(curve: BlurPoint[]): BlurPoint {
  return curve.reduce((w, p) => (p.totalPx > w.totalPx ? p : w), curve[0]!);
}

export function blurOverRangeCheck(input: ValidationInput, curve: BlurPoint[], tolerance: BlurTolerance): Check {
  const worst = worstPoint(curve);
  const limit = tolerance.blurPx;
  const { task, profile } = input;
  const v = againstMax(worst.totalPx, limit, 'px', 'the {} the model tolerates');
  const range = `range ${fmt(task.nearDistanceM)}–${fmt(task.farDistanceM)} m, focus ${fmt(profile.camera.focusDistanceM)} m, diffraction ${fmt(worst.diffractionPx)} px`;
  const head = `worst blur ${fmt(worst.totalPx)} px at ${fmt(worst.distanceM)} m (${range}) ${v.text}; tolerance from ${tolerance.basis}`;
  if (v.ok) return makeCheck('blur-over-range', 'pass', worst.totalPx, limit, 'px', 'camera.focusDistanceM', head);
  if (limit <= 0) return makeCheck('blur-over-range', 'fail', worst.totalPx, limit, 'px', 'modelId', `${head}: no camera setting can help`);
  if (worst.diffractionPx > limit) {
    return makeCheck('blur-over-range', 'fail', worst.totalPx, limit, 'px', 'camera.fNumber',
      `${head}. Diffraction alone at f/${profile.camera.fNumber} exceeds the tolerance: a wider aperture is needed`);
  }
  const bestFocusM = mmToM(focusForRangeMm(mToMm(task.nearDistanceM), mToMm(task.farDistanceM)));
  const best = worstPoint(blurCurve(input, bestFocusM));
  if (best.totalPx > limit) {
    return makeCheck('blur-over-range', 'fail', worst.totalPx, limit, 'px', 'camera.fNumber',
      `${head}. ${sameFocus(bestFocusM, profile.camera.focusDistanceM) ? 'That focus already balances the blur at both ends' : `Even focused at ${fmt(bestFocusM)} m, which balances the blur at both ends, the worst blur is ${fmt(best.totalPx)} px`}: the depth of field at f/${profile.camera.fNumber} cannot cover the range, a narrower aperture is needed`);
  }
  return makeCheck('blur-over-range', 'fail', worst.totalPx, limit, 'px', 'camera.focusDistanceM',
    `${head}. Focusing at ${fmt(bestFocusM)} m would bring the worst blur to ${fmt(best.totalPx)} px`);
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

export function motionBlurCheck(input: ValidationInput, tolerance: BlurTolerance): Check {
  const { task, deviceClass, profile } = input;
  const px = motionBlurPx(task.maxRelativeSpeedMPerS, profile.camera.exposureUs, deviceClass.lens.focalLengthMm, task.nearDistanceM, deviceClass.sensor.pixelPitchUm);
  const limit = task.maxMotionBlurPx ?? tolerance.blurPx;
  const limitBasis = task.maxMotionBlurPx !== undefined ? "the task's motion-blur limit of {}" : 'the {} the model tolerates';
  const v = againstMax(px, limit, 'px', limitBasis);
  const message = `motion blur ${fmt(px)} px at the near end ${fmt(task.nearDistanceM)} m (${fmt(task.maxRelativeSpeedMPerS)} m/s, ${fmt(profile.camera.exposureUs)} µs exposure) ${v.text}`;
  return makeCheck('motion-blur', v.ok ? 'pass' : 'fail', px, limit, 'px', 'camera.exposureUs', message);
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
  const cocMm = tolerance.blurPx * umToMm(sensor.pixelPitchUm);
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
