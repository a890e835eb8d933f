/** Motion blur of an object moving across the field of view during one exposure. */
import { degToRad, mToMm, umToMm, usToS } from './units.js';

/**
 * Image-plane smear in pixels, v·t·f/(d·p): the distance moved during the exposure, scaled by the
 * pinhole magnification f/d and divided by the pixel pitch (pinhole approximation, d ≫ f; motion
 * perpendicular to the optical axis).
 */
export function motionBlurPx(speedMPerS: number, exposureUs: number, focalLengthMm: number, distanceM: number, pixelPitchUm: number): number {
  const travelMm = mToMm(speedMPerS * usToS(exposureUs));
  const imageTravelMm = (travelMm * focalLengthMm) / mToMm(distanceM);
  return imageTravelMm / umToMm(pixelPitchUm);
}

/** Longest exposure that keeps motion blur within a pixel budget (motionBlurPx solved for t). */
export function maxExposureUsForBlur(maxBlurPx: number, speedMPerS: number, focalLengthMm: number, distanceM: number, pixelPitchUm: number): number {
  if (speedMPerS <= 0) return Infinity;
  const blurPerUs = motionBlurPx(speedMPerS, 1, focalLengthMm, distanceM, pixelPitchUm);
  return maxBlurPx / blurPerUs;
}

/**
 * Image-plane smear in pixels from turning the camera at a steady rate, f·tan(ω·t)/p: a rotation moves every
 * point of the image by the same angle whatever its distance (pinhole camera, image centre).
 */
export function rotationBlurPx(rateDegPerS: number, exposureUs: number, focalLengthMm: number, pixelPitchUm: number): number {
  const angleRad = degToRad(rateDegPerS * usToS(exposureUs));
  return (focalLengthMm * Math.tan(angleRad)) / umToMm(pixelPitchUm);
}

/** What moves the image during an interval: the robot's speed across the view and its turn rates. */
export interface CameraMotion {
  speedMPerS: number;
  yawRateDegPerS: number;
  pitchRateDegPerS: number;
}

/**
 * Length of the image's smear over an interval, pixels. Translation across the view and yaw move the image
 * sideways and are added (the worst case, when they act the same way); pitch moves it up or down and is added
 * in quadrature (pinhole camera; the same geometry as motionBlurPx and rotationBlurPx).
 */
export function smearPx(motion: CameraMotion, durationUs: number, focalLengthMm: number, distanceM: number, pixelPitchUm: number): number {
  const sideways = motionBlurPx(motion.speedMPerS, durationUs, focalLengthMm, distanceM, pixelPitchUm) + rotationBlurPx(motion.yawRateDegPerS, durationUs, focalLengthMm, pixelPitchUm);
  const upDown = rotationBlurPx(motion.pitchRateDegPerS, durationUs, focalLengthMm, pixelPitchUm);
  return Math.hypot(sideways, upDown);
}

/** Time a rolling shutter takes from the first row's start to the last row's start, (rows − 1)·line time, µs. */
export function rollingReadoutUs(lineTimeUs: number, heightPx: number): number {
  return lineTimeUs * (heightPx - 1);
}
