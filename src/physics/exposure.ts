/**
 * Exposure: exposure value, the reflected-light meter equation, and focal-plane illuminance
 * and exposure (ISO 12232), with a monochromatic conversion from lux to irradiance.
 */
import { LUMINOUS_EFFICACY_LM_PER_W, photopicEfficiency } from './luminosity.js';
import { degToRad, wM2ToUwCm2 } from './units.js';

/** Exposure value EV = log2(N²/t) (ISO 2720:1974). */
export function exposureValue(fNumber: number, exposureS: number): number {
  return Math.log2((fNumber * fNumber) / exposureS);
}

/** EV referred to ISO 100: EV100 = log2(N²/t) − log2(S/100) (ISO 2720:1974). */
export function ev100(fNumber: number, exposureS: number, iso: number): number {
  return exposureValue(fNumber, exposureS) - Math.log2(iso / 100);
}

/** Reflected-light meter equation N²/t = L·S/K solved for t; K = 12.5 cd/m² (ISO 2720:1974 allows 10.6–13.4). */
export function meterExposureS(luminanceCdM2: number, fNumber: number, iso: number, k = 12.5): number {
  return (fNumber * fNumber * k) / (luminanceCdM2 * iso);
}

/**
 * Lens factor q = (π/4)·T·v·cos⁴θ relating scene luminance to focal-plane illuminance
 * (ISO 12232:2019); T = 0.9, v = 0.98, θ = 10° give q ≈ 0.65.
 */
export function isoQ(transmittance = 0.9, vignetting = 0.98, angleDeg = 10): number {
  const cosTheta = Math.cos(degToRad(angleDeg));
  return (Math.PI / 4) * transmittance * vignetting * cosTheta ** 4;
}

/** Focal-plane illuminance E = q·L/N² for a distant object (ISO 12232). */
export function focalPlaneIlluminanceLx(luminanceCdM2: number, fNumber: number, q = isoQ()): number {
  return (q * luminanceCdM2) / (fNumber * fNumber);
}

/** Focal-plane exposure H = q·L·t/N² in lux-seconds (ISO 12232). */
export function focalPlaneExposureLxS(luminanceCdM2: number, fNumber: number, exposureS: number, q = isoQ()): number {
  return focalPlaneIlluminanceLx(luminanceCdM2, fNumber, q) * exposureS;
}

/**
 * Irradiance of monochromatic light at λ carrying a given illuminance: Ee = Ev / (683 lm/W · V(λ))
 * (SI Brochure, 9th ed.; V(λ) from the CIE 1924 table in luminosity.ts). Real scenes are broadband;
 * treating the light as a single design wavelength is an approximation, good to the order of magnitude
 * for white light evaluated at 550 nm. Throws RangeError outside 380–780 nm, where lux says nothing about power.
 */
export function illuminanceToIrradianceUwCm2(lux: number, wavelengthNm: number): number {
  const v = photopicEfficiency(wavelengthNm);
  if (!(v > 0)) {
    throw new RangeError(`wavelength ${wavelengthNm} nm lies outside the photopic range 380–780 nm; illuminance cannot be converted`);
  }
  return wM2ToUwCm2(lux / (LUMINOUS_EFFICACY_LM_PER_W * v));
}
