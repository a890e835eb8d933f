/**
 * The point-spread function and noise of a profile at one object distance, in the network's input pixels.
 * The blur is the validator's image chain at that distance (src/validate/image-model.ts: diffraction at the
 * working f-number, defocus, pixel aperture, motion smear), turned into a kernel by src/render/chain-psf.ts;
 * its size is the chain's equivalent blur diameter (the disc with the same MTF50). The noise is the EMVA 1288
 * SNR of one sensor pixel at the given scene luminance (src/physics/sensor.ts), improved by downscaling, which
 * averages (sensor px / input px)² pixels into one: +20·log10(sensor/input) dB.
 */
import type { BlurKernel } from '../physics/blur-kernel.js';
import { chainBlurDiameterUm, diffractionCutoffCycPerMm, type ImageChain } from '../physics/mtf.js';
import { pixelSignal, scenePhotonsPerPixel } from '../physics/sensor.js';
import { chainAt, imageSetup, workingFNumberAt } from '../validate/image-model.js';
import type { ValidationInput } from '../validate/index.js';
import { chainPsfKernel } from './chain-psf.js';

export interface ProfilePsf {
  distanceM: number;
  /** Sensor pixels per network-input pixel along the width (1 when not downscaled). */
  downscale: number;
  chain: ImageChain;
  /** Equivalent blur diameter of the chain (the disc with the same MTF50). */
  blurSpotSensorPx: number;
  blurSpotInputPx: number;
  motionInputPx: number;
  luminanceCdM2: number;
  snrSensorDb: number;
  snrInputDb: number;
  kernel: BlurKernel;
}

export function profilePsf(input: ValidationInput, distanceM: number, luminanceCdM2 = input.task.luminanceMinCdM2): ProfilePsf {
  const { task, deviceClass, model, profile } = input;
  const { sensor } = deviceClass;
  const { camera } = profile;
  const setup = imageSetup(task, deviceClass, camera.exposureUs, model.inputWidthPx);
  const workingF = workingFNumberAt(setup, camera.fNumber, camera.focusDistanceM);
  const chain = chainAt(setup, camera.fNumber, camera.focusDistanceM, distanceM, diffractionCutoffCycPerMm(setup.wavelengthNm, workingF));
  const blurSpotSensorPx = chainBlurDiameterUm(chain) / sensor.pixelPitchUm;
  const inputPxUm = setup.downscale * sensor.pixelPitchUm;
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
  const blurSpotInputPx = blurSpotSensorPx / setup.downscale;
  return {
    distanceM,
    downscale: setup.downscale,
    chain,
    blurSpotSensorPx,
    blurSpotInputPx,
    motionInputPx: chain.motionUm / inputPxUm,
    luminanceCdM2,
    snrSensorDb: signal.snrDb,
    snrInputDb: signal.snrDb + 20 * Math.log10(setup.downscale),
    kernel: chainPsfKernel(chain, inputPxUm, blurSpotInputPx),
  };
}
