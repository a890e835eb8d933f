/**
 * Light at the sensor as a spectrum. Electrons per pixel = ∫ E(λ)·T(λ)·QE(λ)·λ/(hc) dλ × pixel area × exposure
 * (EMVA 1288 Release 4.0, eq. 1–2, with the photon count taken per wavelength), where E(λ) is the spectral
 * irradiance on the sensor, T the lens transmission (with an optional ideal IR cut) and QE the sensor's
 * quantum efficiency. Illuminance fixes the scale of E through the CIE photopic function:
 * Ev = 683 lm/W · ∫ V(λ)·E(λ) dλ (SI Brochure, 9th ed., 2019; CIE 1924 V(λ)).
 * Integrals are trapezoids on a 1 nm grid from 300 to 1100 nm; a monochromatic line is evaluated exactly.
 */
import type { FractionCurve, Illuminant } from '../schema/light.js';
import { SPECTRUM_MAX_NM, SPECTRUM_MIN_NM } from '../schema/light.js';
import { LUMINOUS_EFFICACY_LM_PER_W, photopicEfficiency } from './luminosity.js';
import { PLANCK_J_S, SPEED_OF_LIGHT_M_PER_S } from './sensor.js';
import { relativePower } from './spectra.js';
import { msToS, nmToM, um2ToM2 } from './units.js';

export const GRID_STEP_NM = 1;
const GRID_POINTS = Math.round((SPECTRUM_MAX_NM - SPECTRUM_MIN_NM) / GRID_STEP_NM) + 1;

/** The optical path from scene to electrons, as functions of wavelength. */
export interface SpectralPath {
  /** Flat QE, used when no curve is given. */
  quantumEfficiency: number;
  quantumEfficiencyCurve?: FractionCurve | undefined;
  /** Flat lens transmission, used when no curve is given (1 for light already on the sensor). */
  transmission: number;
  transmissionCurve?: FractionCurve | undefined;
  /** Ideal infrared cut: nothing passes above it. */
  irCutNm?: number | undefined;
}

/** Linear between the curve's points, 0 outside them. */
export function curveValue(curve: FractionCurve, wavelengthNm: number): number {
  const first = curve[0]!;
  const last = curve[curve.length - 1]!;
  if (wavelengthNm < first.wavelengthNm || wavelengthNm > last.wavelengthNm) return 0;
  let i = 1;
  while (curve[i]!.wavelengthNm < wavelengthNm) i++;
  const a = curve[i - 1]!;
  const b = curve[i]!;
  return a.value + ((wavelengthNm - a.wavelengthNm) / (b.wavelengthNm - a.wavelengthNm)) * (b.value - a.value);
}

/** QE × transmission at a wavelength: the share of photons arriving at the lens that become electrons. */
export function pathResponse(path: SpectralPath, wavelengthNm: number): number {
  if (path.irCutNm !== undefined && wavelengthNm > path.irCutNm) return 0;
  const qe = path.quantumEfficiencyCurve ? curveValue(path.quantumEfficiencyCurve, wavelengthNm) : path.quantumEfficiency;
  const t = path.transmissionCurve ? curveValue(path.transmissionCurve, wavelengthNm) : path.transmission;
  return qe * t;
}

/** As pathResponse without the QE: the share of photons that reach the sensor. */
export function pathTransmission(path: SpectralPath, wavelengthNm: number): number {
  if (path.irCutNm !== undefined && wavelengthNm > path.irCutNm) return 0;
  return path.transmissionCurve ? curveValue(path.transmissionCurve, wavelengthNm) : path.transmission;
}

/** Photons per joule at a wavelength, λ/(hc) (photon energy hc/λ; h and c exact in the SI). */
export function photonsPerJoule(wavelengthNm: number): number {
  return nmToM(wavelengthNm) / (PLANCK_J_S * SPEED_OF_LIGHT_M_PER_S);
}

/**
 * Per unit of an illuminant's light, what reaches the sensor: photons and electrons per joule of incident
 * radiant energy and per lumen-second (null when the light has no visible part), and the band counted.
 */
export interface SpectralFactors {
  /** Photons through the optics per joule of light arriving at the lens. */
  photonsPerJ: number;
  electronsPerJ: number;
  /** Lumens per watt of the light: 683·∫V·S / ∫S (SI Brochure; CIE 1924 V(λ)). 0 for invisible light. */
  luminousEfficacyLmPerW: number;
  /** photonsPerJ ÷ efficacy: photons per lumen-second; null when the light has no lux. */
  photonsPerLmS: number | null;
  electronsPerLmS: number | null;
  /** Lowest and highest wavelength where the light counts at least 0.1 % of its peak (electrons, or photons if none), nm. */
  bandNm: [number, number] | null;
}

/** Spectral factors of an illuminant through an optical path (see SpectralFactors). Pure; O(grid). */
export function spectralFactors(illuminant: Illuminant, path: SpectralPath): SpectralFactors {
  if (illuminant.type === 'monochromatic') {
    const l = illuminant.wavelengthNm;
    const t = pathTransmission(path, l);
    const photonsPerJ = t * photonsPerJoule(l);
    const electronsPerJ = pathResponse(path, l) * photonsPerJoule(l);
    const efficacy = LUMINOUS_EFFICACY_LM_PER_W * photopicEfficiency(l);
    return finish(photonsPerJ, electronsPerJ, efficacy, photonsPerJ > 0 ? [l, l] : null);
  }
  let power = 0;
  let visible = 0;
  let photons = 0;
  let electrons = 0;
  const counted = new Float64Array(GRID_POINTS);
  let peak = 0;
  for (let k = 0; k < GRID_POINTS; k++) {
    const l = SPECTRUM_MIN_NM + k * GRID_STEP_NM;
    const w = k === 0 || k === GRID_POINTS - 1 ? 0.5 : 1; // trapezoid weights
    const s = relativePower(illuminant, l) * w;
    if (s === 0) continue;
    const ppj = photonsPerJoule(l);
    const tr = pathTransmission(path, l);
    const resp = pathResponse(path, l);
    power += s;
    visible += s * photopicEfficiency(l);
    photons += s * tr * ppj;
    electrons += s * resp * ppj;
    // The band is judged on electrons when any are made, else on photons reaching the sensor.
    counted[k] = s * (resp > 0 ? resp : tr * 1e-12) * ppj;
    if (counted[k]! > peak) peak = counted[k]!;
  }
  if (!(power > 0)) return finish(0, 0, 0, null);
  return finish(photons / power, electrons / power, (LUMINOUS_EFFICACY_LM_PER_W * visible) / power, bandOf(counted, peak));
}

/** Lowest and highest grid wavelength where the counted light is at least BAND_SHARE of its peak. */
export const BAND_SHARE = 1e-3;
function bandOf(counted: Float64Array, peak: number): [number, number] | null {
  if (!(peak > 0)) return null;
  let lo = -1;
  let hi = -1;
  for (let k = 0; k < counted.length; k++) {
    if (counted[k]! >= BAND_SHARE * peak) {
      if (lo < 0) lo = k;
      hi = k;
    }
  }
  return [SPECTRUM_MIN_NM + lo * GRID_STEP_NM, SPECTRUM_MIN_NM + hi * GRID_STEP_NM];
}

function finish(photonsPerJ: number, electronsPerJ: number, efficacy: number, bandNm: [number, number] | null): SpectralFactors {
  // Below a millionth of the peak efficacy the light is taken as having no lux (an NIR line's Gaussian tail).
  const hasLux = efficacy > LUMINOUS_EFFICACY_LM_PER_W * 1e-6;
  return {
    photonsPerJ,
    electronsPerJ,
    luminousEfficacyLmPerW: efficacy,
    photonsPerLmS: hasLux ? photonsPerJ / efficacy : null,
    electronsPerLmS: hasLux ? electronsPerJ / efficacy : null,
    bandNm,
  };
}

/** Photons (or electrons) per pixel from a per-joule factor: factor × irradiance × pixel area × exposure. */
export function countFromIrradiance(perJ: number, irradianceWM2: number, pixelPitchUm: number, exposureMs: number): number {
  return perJ * irradianceWM2 * um2ToM2(pixelPitchUm * pixelPitchUm) * msToS(exposureMs);
}

/** Photons (or electrons) per pixel from a per-lumen-second factor and an illuminance in lux (lm/m²). */
export function countFromIlluminance(perLmS: number, illuminanceLx: number, pixelPitchUm: number, exposureMs: number): number {
  return perLmS * illuminanceLx * um2ToM2(pixelPitchUm * pixelPitchUm) * msToS(exposureMs);
}

/** Irradiance of a small source at a distance: E = I/d² (inverse-square law, on axis). */
export function inverseSquareIrradianceWM2(radiantIntensityWPerSr: number, distanceM: number): number {
  return radiantIntensityWPerSr / (distanceM * distanceM);
}

/** Radiance of a Lambertian surface of reflectance ρ under irradiance E: L = ρ·E/π (Lambert's cosine law). */
export function lambertianRadianceWM2Sr(reflectance: number, irradianceWM2: number): number {
  return (reflectance * irradianceWM2) / Math.PI;
}

/**
 * Sensor-plane irradiance (or illuminance) from scene radiance (or luminance) without the lens transmission:
 * E = (π/4)·v·cos⁴θ·L/N_w² (ISO 12232:2019 focal-plane exposure, q without T; cos⁴ law of relative illumination).
 */
export function sensorPlaneFromScene(sceneRadiance: number, workingFNumber: number, vignetting: number, fieldAngleRad: number): number {
  const c = Math.cos(fieldAngleRad);
  return ((Math.PI / 4) * vignetting * c * c * c * c * sceneRadiance) / (workingFNumber * workingFNumber);
}

/** Relative illumination of a simple lens at field angle θ: cos⁴θ (cos⁴ law). */
export function cos4FallOff(fieldAngleRad: number): number {
  const c = Math.cos(fieldAngleRad);
  return c * c * c * c;
}

/** Field angle of the image corner: atan(half the sensor diagonal / focal length) (rectilinear lens). */
export function cornerFieldAngleRad(sensorWidthMm: number, sensorHeightMm: number, focalLengthMm: number): number {
  return Math.atan(Math.hypot(sensorWidthMm, sensorHeightMm) / 2 / focalLengthMm);
}

export interface PixelLightConversion {
  photons: number;
  electrons: number;
  /** Photons per lux-second per µm² of pixel; null for light with no visible part. */
  photonsPerLuxSUm2: number | null;
  bandNm: [number, number] | null;
}

/**
 * Photons and electrons of one pixel for light on the sensor, given as an illuminance (lux) or a band-integrated
 * irradiance (W/m²) of an illuminant, through an optical path (QE, IR cut). Throws RangeError for an illuminance
 * of light with no visible part, where lux says nothing about its power.
 */
export function convertLightAtPixel(
  illuminant: Illuminant,
  level: { illuminanceLx: number } | { irradianceWM2: number },
  pixelPitchUm: number,
  exposureMs: number,
  path: SpectralPath,
): PixelLightConversion {
  const f = spectralFactors(illuminant, path);
  const photonsPerLuxSUm2 = f.photonsPerLmS === null ? null : countFromIlluminance(f.photonsPerLmS, 1, 1, MS_PER_S_UNIT);
  if ('illuminanceLx' in level) {
    if (f.photonsPerLmS === null || f.electronsPerLmS === null) {
      throw new RangeError('this light has no visible part, so an illuminance in lux says nothing about its power: give its irradiance in W/m²');
    }
    return {
      photons: countFromIlluminance(f.photonsPerLmS, level.illuminanceLx, pixelPitchUm, exposureMs),
      electrons: countFromIlluminance(f.electronsPerLmS, level.illuminanceLx, pixelPitchUm, exposureMs),
      photonsPerLuxSUm2,
      bandNm: f.bandNm,
    };
  }
  return {
    photons: countFromIrradiance(f.photonsPerJ, level.irradianceWM2, pixelPitchUm, exposureMs),
    electrons: countFromIrradiance(f.electronsPerJ, level.irradianceWM2, pixelPitchUm, exposureMs),
    photonsPerLuxSUm2,
    bandNm: f.bandNm,
  };
}

/** One second, in the milliseconds countFromIlluminance takes. */
const MS_PER_S_UNIT = 1_000;
