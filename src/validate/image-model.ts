/**
 * The image a profile makes at each distance of the working range, as the network receives it: the system MTF
 * (diffraction at the working f-number, defocus, pixel aperture, motion during the exposure) turned into an
 * equivalent blur disc, in sensor pixels and in the network's input pixels after the downscale.
 */
import { blurCircleMm } from '../physics/optics.js';
import {
  chainBlurDiameterUm,
  diffractionCutoffCycPerMm,
  magnificationAtFocus,
  pixelApertureUm,
  stageBlurDiametersUm,
  workingFNumber,
} from '../physics/mtf.js';
import type { ImageChain } from '../physics/mtf.js';
import { rollingReadoutUs, smearPx } from '../physics/motion.js';
import type { CameraMotion } from '../physics/motion.js';
import { mToMm, mmToUm, msToUs } from '../physics/units.js';
import type { DeviceClass, Task } from '../schema/index.js';

/** Distances sampled across the working range (plus both ends and the focus distance). */
export const BLUR_SAMPLES = 64;

/** The combined blur at one distance and each stage's own part (the equivalent disc of that stage alone). */
export interface BlurPoint {
  distanceM: number;
  /** Geometric defocus disc, sensor px. */
  defocusPx: number;
  diffractionPx: number;
  pixelPx: number;
  /** Equivalent disc of the motion smear, sensor px. */
  motionPx: number;
  /** Length of the smear during the exposure, sensor px. */
  smearPx: number;
  /** Equivalent blur of the whole chain, sensor px. */
  totalPx: number;
  /** The same in the network's input pixels (sensor px ÷ downscale). */
  totalInputPx: number;
}

/** What stays the same across the working range for one lens, sensor, task and camera setting. */
export interface ImageSetup {
  focalLengthMm: number;
  pixelPitchUm: number;
  apertureUm: number;
  wavelengthNm: number;
  motion: CameraMotion;
  /** The rows' time during which the image moves: exposure, plus one line time for a rolling shutter. */
  smearTimeUs: number;
  /** Sensor pixels per network input pixel (1 when the network takes the sensor's width). */
  downscale: number;
}

/** Sensor pixels per input pixel across the width; 1 when the network's input is as wide as the sensor or wider. */
export function downscaleFactor(sensorWidthPx: number, inputWidthPx: number): number {
  return sensorWidthPx > inputWidthPx ? sensorWidthPx / inputWidthPx : 1;
}

/** Line time of a rolling shutter: given, or the frame readout spread evenly over the rows. */
export function lineTimeUs(sensor: DeviceClass['sensor']): number {
  return sensor.lineTimeUs ?? msToUs(sensor.readoutMsPerFrame) / sensor.heightPx;
}

export function cameraMotion(task: Task): CameraMotion {
  return { speedMPerS: task.maxRelativeSpeedMPerS, yawRateDegPerS: task.maxYawRateDegPerS, pitchRateDegPerS: task.maxPitchRateDegPerS };
}

export function imageSetup(task: Task, deviceClass: DeviceClass, exposureUs: number, inputWidthPx: number): ImageSetup {
  const { lens, sensor } = deviceClass;
  return {
    focalLengthMm: lens.focalLengthMm,
    pixelPitchUm: sensor.pixelPitchUm,
    apertureUm: pixelApertureUm(sensor.pixelPitchUm, sensor.fillFactor),
    wavelengthNm: sensor.designWavelengthNm,
    motion: cameraMotion(task),
    smearTimeUs: exposureUs + (sensor.shutter === 'rolling' ? lineTimeUs(sensor) : 0),
    downscale: downscaleFactor(sensor.widthPx, inputWidthPx),
  };
}

/**
 * Working f-number of a lens focused at s: N·(1 + m), m = f/(s − f). Used for diffraction and for the light
 * reaching the sensor (the image of a close object lies further behind the lens).
 */
export function workingFNumberForFocus(focalLengthMm: number, fNumber: number, focusM: number): number {
  return workingFNumber(fNumber, magnificationAtFocus(focalLengthMm, mToMm(focusM)));
}

/** Working f-number at a focus distance: N·(1 + m), m = f/(s − f). */
export function workingFNumberAt(setup: ImageSetup, fNumber: number, focusM: number): number {
  return workingFNumberForFocus(setup.focalLengthMm, fNumber, focusM);
}

/** The image chain at one object distance. */
export function chainAt(setup: ImageSetup, fNumber: number, focusM: number, distanceM: number, cutoffCycPerMm: number): ImageChain {
  const defocusMm = blurCircleMm(setup.focalLengthMm, fNumber, mToMm(focusM), mToMm(distanceM));
  const smear = smearPx(setup.motion, setup.smearTimeUs, setup.focalLengthMm, distanceM, setup.pixelPitchUm);
  return { cutoffCycPerMm, defocusBlurUm: mmToUm(defocusMm), pixelApertureUm: setup.apertureUm, motionUm: smear * setup.pixelPitchUm };
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

/** The combined blur and its parts at every sampled distance of the task's range. */
export function blurCurveOf(task: Task, setup: ImageSetup, fNumber: number, focusM: number): BlurPoint[] {
  const cutoff = diffractionCutoffCycPerMm(setup.wavelengthNm, workingFNumberAt(setup, fNumber, focusM));
  const p = setup.pixelPitchUm;
  return sampleDistancesM(task.nearDistanceM, task.farDistanceM, focusM).map((distanceM) => {
    const chain = chainAt(setup, fNumber, focusM, distanceM, cutoff);
    const parts = stageBlurDiametersUm(chain);
    const totalPx = chain.defocusBlurUm === Infinity ? Infinity : chainBlurDiameterUm(chain) / p;
    return {
      distanceM,
      defocusPx: chain.defocusBlurUm / p,
      diffractionPx: parts.diffraction / p,
      pixelPx: parts.pixel / p,
      motionPx: parts.motion / p,
      smearPx: chain.motionUm / p,
      totalPx,
      totalInputPx: totalPx / setup.downscale,
    };
  });
}

/**
 * Worst combined blur over the sampled range, sensor px, without building the curve (the planner's inner
 * tables); the same calls in the same order as blurCurveOf, so the figures are identical.
 */
export function worstCombinedBlurPx(task: Task, setup: ImageSetup, fNumber: number, focusM: number): number {
  const cutoff = diffractionCutoffCycPerMm(setup.wavelengthNm, workingFNumberAt(setup, fNumber, focusM));
  const distancesM = sampleDistancesM(task.nearDistanceM, task.farDistanceM, focusM);
  let worst = -Infinity;
  for (let i = 0; i < distancesM.length; i++) {
    const chain = chainAt(setup, fNumber, focusM, distancesM[i]!, cutoff);
    const px = chain.defocusBlurUm === Infinity ? Infinity : chainBlurDiameterUm(chain) / setup.pixelPitchUm;
    if (i === 0 || px > worst) worst = px;
  }
  return worst;
}

export function worstPoint(curve: BlurPoint[]): BlurPoint {
  return curve.reduce((w, p) => (p.totalPx > w.totalPx ? p : w), curve[0]!);
}

/** Rolling-shutter skew: how far the image moves between the first and the last row's exposure, sensor px, at a distance. */
export function rollingSkewPx(task: Task, deviceClass: DeviceClass, distanceM: number): number {
  const { lens, sensor } = deviceClass;
  if (sensor.shutter !== 'rolling') return 0;
  return smearPx(cameraMotion(task), rollingReadoutUs(lineTimeUs(sensor), sensor.heightPx), lens.focalLengthMm, distanceM, sensor.pixelPitchUm);
}
