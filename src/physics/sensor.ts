/**
 * Image-sensor signal and noise after the EMVA 1288 linear camera model (release 3.1, 2010).
 * Symbols: μp photons, η quantum efficiency, μe electrons, σd dark noise (e⁻), K overall gain (DN/e⁻),
 * σq² = 1/12 DN² quantization noise. Analog gain multiplies K; dark noise is held constant in electrons
 * (a simplification: on real sensors input-referred read noise usually falls a little as gain rises).
 */
import { focalPlaneIlluminanceLx, illuminanceToIrradianceUwCm2, isoQ } from './exposure.js';
import { msToS, nmToM, ratioToDb, um2ToM2, uwCm2ToWM2, usToMs } from './units.js';

/** Planck constant, J·s, and speed of light, m/s (exact in the 2019 SI). */
export const PLANCK_J_S = 6.62607015e-34;
export const SPEED_OF_LIGHT_M_PER_S = 299_792_458;
/** Quantization noise variance of an ideal uniform quantizer, 1/12 DN² (EMVA 1288 3.1). */
export const QUANTIZATION_NOISE_VAR_DN2 = 1 / 12;

/**
 * Mean photons per pixel μp = A·E·t·λ/(h·c) (EMVA 1288 3.1),
 * ≈ 50.34 · A[µm²] · t[ms] · λ[µm] · E[µW/cm²]. The pixel area is taken as pitch² (100 % fill).
 */
export function photonsPerPixel(irradianceUwCm2: number, pixelPitchUm: number, exposureMs: number, wavelengthNm: number): number {
  const areaM2 = um2ToM2(pixelPitchUm * pixelPitchUm);
  const energyJ = areaM2 * uwCm2ToWM2(irradianceUwCm2) * msToS(exposureMs);
  return (energyJ * nmToM(wavelengthNm)) / (PLANCK_J_S * SPEED_OF_LIGHT_M_PER_S);
}

/** Overall system gain K at an analog gain: DN per electron. */
export function systemGainDnPerE(gainDnPerE: number, analogGain: number): number {
  return gainDnPerE * analogGain;
}

/**
 * Saturation capacity in electrons: the full well, or the electrons that fill the ADC range,
 * whichever comes first: min(full well, (2^bits − 1) / K). EMVA 1288 3.1 measures the saturation
 * capacity μe,sat; this is our model of it from data-sheet figures.
 */
export function saturationElectrons(fullWellE: number, bitDepth: number, gainDnPerE: number, analogGain: number): number {
  return Math.min(fullWellE, (2 ** bitDepth - 1) / systemGainDnPerE(gainDnPerE, analogGain));
}

/** Maximum SNR, reached at saturation and limited by shot noise: √μe,sat (EMVA 1288 3.1). */
export function maxSnr(saturationE: number): number {
  return Math.sqrt(saturationE);
}

/** Temporal dark noise in DN, σy,dark = √(K²σd² + σq²) (EMVA 1288 3.1). */
export function darkNoiseDn(darkNoiseE: number, gainDnPerE: number): number {
  return Math.sqrt(gainDnPerE * gainDnPerE * darkNoiseE * darkNoiseE + QUANTIZATION_NOISE_VAR_DN2);
}

/**
 * Absolute sensitivity threshold, the photons per pixel at which SNR ≈ 1:
 * μp,min = (1/η)(σy,dark/K + ½) with σy,dark in DN (EMVA 1288 3.1).
 * The dark noise is given in electrons and converted to DN with K, quantization noise included.
 */
export function absoluteSensitivityThresholdPhotons(quantumEfficiency: number, darkNoiseE: number, gainDnPerE: number): number {
  return (darkNoiseDn(darkNoiseE, gainDnPerE) / gainDnPerE + 0.5) / quantumEfficiency;
}

/** SNR of a pixel holding μe electrons: μe / √(σd² + σq²/K² + μe) (EMVA 1288 3.1). */
export function snrOfElectrons(electrons: number, darkNoiseE: number, systemGain: number): number {
  const varianceE2 = darkNoiseE * darkNoiseE + QUANTIZATION_NOISE_VAR_DN2 / (systemGain * systemGain) + electrons;
  return electrons / Math.sqrt(varianceE2);
}

export interface PixelSignalInput {
  photons: number;
  quantumEfficiency: number;
  darkNoiseE: number;
  gainDnPerE: number;
  fullWellE: number;
  bitDepth: number;
  analogGain: number;
}

export interface PixelSignal {
  /** Mean electrons μe = η·μp, clipped at the saturation capacity. */
  electrons: number;
  saturated: boolean;
  snr: number;
  /** 20·log10(snr); −Infinity for no signal. */
  snrDb: number;
}

/** Electrons, saturation and SNR of one pixel (EMVA 1288 3.1 linear model; see the module comment). */
export function pixelSignal(input: PixelSignalInput): PixelSignal {
  const k = systemGainDnPerE(input.gainDnPerE, input.analogGain);
  const saturationE = saturationElectrons(input.fullWellE, input.bitDepth, input.gainDnPerE, input.analogGain);
  const collectedE = input.quantumEfficiency * input.photons;
  const saturated = collectedE >= saturationE;
  const electrons = saturated ? saturationE : collectedE;
  const snr = snrOfElectrons(electrons, input.darkNoiseE, k);
  return { electrons, saturated, snr, snrDb: ratioToDb(snr) };
}

export interface SceneElectronsInput {
  luminanceCdM2: number;
  fNumber: number;
  exposureUs: number;
  pixelPitchUm: number;
  quantumEfficiency: number;
  wavelengthNm: number;
  /** Lens factor q (ISO 12232); defaults to isoQ() ≈ 0.65. */
  q?: number;
}

/**
 * Mean electrons per pixel for a scene of given luminance, not clipped at saturation
 * (pass the result's photons through pixelSignal for clipping and SNR). Chain: focal-plane illuminance
 * E = q·L/N² (ISO 12232) → irradiance at the design wavelength (683 lm/W · V(λ)) → photons (EMVA 1288) → η·μp.
 */
export function sceneElectronsPerPixel(input: SceneElectronsInput): number {
  return input.quantumEfficiency * scenePhotonsPerPixel(input);
}

/** Photons per pixel for a scene of given luminance; see sceneElectronsPerPixel. */
export function scenePhotonsPerPixel(input: Omit<SceneElectronsInput, 'quantumEfficiency'>): number {
  const lux = focalPlaneIlluminanceLx(input.luminanceCdM2, input.fNumber, input.q ?? isoQ());
  const irradianceUwCm2 = illuminanceToIrradianceUwCm2(lux, input.wavelengthNm);
  return photonsPerPixel(irradianceUwCm2, input.pixelPitchUm, usToMs(input.exposureUs), input.wavelengthNm);
}
