/**
 * The point-spread function and noise of a profile at one object distance, in the network's input pixels.
 * Built from the validator's current image model, behind this one function: thin-lens defocus circle and
 * Airy disk combined in quadrature into one uniform blur disc (src/physics/optics.ts totalBlurPx), linear
 * motion blur along x at the task's relative speed (src/physics/motion.ts), the square pixel aperture, and
 * the EMVA 1288 SNR of one sensor pixel at the given scene luminance (src/physics/sensor.ts), improved by
 * downscaling, which averages (sensor px / input px)² pixels into one: +20·log10(sensor/input) dB.
 */
import { sweptDiscKernel, type BlurKernel } from '../physics/blur-kernel.js';
import { motionBlurPx } from '../physics/motion.js';
import { airyDiameterUm, blurCircleMm, totalBlurPx } from '../physics/optics.js';
import { pixelSignal, scenePhotonsPerPixel } from '../physics/sensor.js';
import { mToMm } from '../physics/units.js';
import type { ValidationInput } from '../validate/index.js';

export interface ProfilePsf {
  distanceM: number;
  /** Sensor pixels per network-input pixel along the width (1 when not downscaled). */
  downscale: number;
  blurSpotSensorPx: number;
  blurSpotInputPx: number;
  motionInputPx: number;
  luminanceCdM2: number;
  snrSensorDb: number;
  snrInputDb: number;
  kernel: BlurKernel;
}

export function profilePsf(input: ValidationInput, distanceM: number, luminanceCdM2 = input.task.luminanceMinCdM2): ProfilePsf {
  const { lens, sensor } = input.deviceClass;
  const { camera } = input.profile;
  const downscale = sensor.widthPx > input.model.inputWidthPx ? sensor.widthPx / input.model.inputWidthPx : 1;
  const defocusMm = blurCircleMm(lens.focalLengthMm, camera.fNumber, mToMm(camera.focusDistanceM), mToMm(distanceM));
  const blurSpotSensorPx = totalBlurPx(defocusMm, airyDiameterUm(sensor.designWavelengthNm, camera.fNumber), sensor.pixelPitchUm);
  const motionSensorPx = motionBlurPx(input.task.maxRelativeSpeedMPerS, camera.exposureUs, lens.focalLengthMm, distanceM, sensor.pixelPitchUm);
  const photons = scenePhotonsPerPixel({ luminanceCdM2, fNumber: camera.fNumber, exposureUs: camera.exposureUs, pixelPitchUm: sensor.pixelPitchUm, wavelengthNm: sensor.designWavelengthNm });
  const signal = pixelSignal({
    photons,
    quantumEfficiency: sensor.quantumEfficiency,
    darkNoiseE: sensor.darkNoiseE,
    gainDnPerE: sensor.gainDnPerE,
    fullWellE: sensor.fullWellE,
    bitDepth: sensor.bitDepth,
    analogGain: camera.analogGain,
  });
  const blurSpotInputPx = blurSpotSensorPx / downscale;
  const motionInputPx = motionSensorPx / downscale;
  return {
    distanceM,
    downscale,
    blurSpotSensorPx,
    blurSpotInputPx,
    motionInputPx,
    luminanceCdM2,
    snrSensorDb: signal.snrDb,
    snrInputDb: signal.snrDb + 20 * Math.log10(downscale),
    kernel: sweptDiscKernel(blurSpotInputPx, motionInputPx),
  };
}
