/** Motion blur of an object moving across the field of view during one exposure. */
import { mToMm, umToMm, usToS } from './units.js';

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
