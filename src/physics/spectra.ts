/**
 * Relative spectral power distributions of the illuminants Ocellus knows, as functions of wavelength.
 * Shapes only: the radiometry scales them to a given illuminance or irradiance.
 *  - CIE standard illuminant A and D65: CIE 15:2004 "Colorimetry", 3rd ed. (also ISO 11664-2:2007).
 *    D65 is shipped as its 10 nm table (300–830 nm), normalised to 100 at 560 nm; outside it, 0.
 *  - LEDs: Gaussian lines in wavelength, the usual first model of an LED spectrum (Ohno, "Spectral design
 *    considerations for white LED color rendering", Optical Engineering 44(11), 2005). The white LED's
 *    line positions and widths are this project's choice for a cool-white phosphor LED, not a standard.
 */
import type { Illuminant } from '../schema/light.js';
import { nmToM } from './units.js';
import { PLANCK_J_S, SPEED_OF_LIGHT_M_PER_S } from './sensor.js';

/** CIE D65 relative spectral power, 300–830 nm in 10 nm steps (CIE 15:2004, Table T.1). */
const D65_START_NM = 300;
const D65_STEP_NM = 10;
const D65_TABLE = [
  0.0341, 3.2945, 20.236, 37.0535, 39.9488, 44.9117, 46.6383, 52.0891, 49.9755, 54.6482, 82.7549, 91.486, 93.4318,
  86.6823, 104.865, 117.008, 117.812, 114.861, 115.923, 108.811, 109.354, 107.802, 104.79, 107.689, 104.405, 104.046,
  100.0, 96.3342, 95.788, 88.6856, 90.0062, 89.5991, 87.6987, 83.2886, 83.6992, 80.0268, 80.2146, 82.2778, 78.2842,
  69.7213, 71.6091, 74.349, 61.604, 69.8856, 75.087, 63.5927, 46.4182, 66.8054, 63.3828, 64.304, 59.4519, 51.959,
  57.4406, 60.3125,
] as const;

/** Boltzmann constant, J/K (exact in the 2019 SI). */
export const BOLTZMANN_J_PER_K = 1.380649e-23;

/** CIE D65 relative spectral power at a wavelength, linear between the 10 nm table points, 0 outside 300–830 nm. */
export function d65RelativePower(wavelengthNm: number): number {
  const x = (wavelengthNm - D65_START_NM) / D65_STEP_NM;
  if (!(x >= 0) || x > D65_TABLE.length - 1) return 0;
  const i = Math.min(Math.floor(x), D65_TABLE.length - 2);
  const t = x - i;
  return D65_TABLE[i]! + t * (D65_TABLE[i + 1]! - D65_TABLE[i]!);
}

/** Planck's law, spectral radiance of a black body: L = 2hc²/λ⁵ / (exp(hc/(λkT)) − 1), W·sr⁻¹·m⁻³. */
export function planckRadianceWPerSrM3(wavelengthNm: number, temperatureK: number): number {
  const lambdaM = nmToM(wavelengthNm);
  const h = PLANCK_J_S;
  const c = SPEED_OF_LIGHT_M_PER_S;
  return (2 * h * c * c) / lambdaM ** 5 / Math.expm1((h * c) / (lambdaM * BOLTZMANN_J_PER_K * temperatureK));
}

/**
 * CIE illuminant A by its defining formula, 100 at 560 nm:
 * S(λ) = 100·(560/λ)⁵·(exp(1.435·10⁷/(2848·560)) − 1)/(exp(1.435·10⁷/(2848·λ)) − 1) (CIE 15:2004, eq. 2.1),
 * a Planckian radiator at 2856 K on today's value of c₂.
 */
export function illuminantARelativePower(wavelengthNm: number): number {
  const c2 = 1.435e7;
  const t = 2848;
  return 100 * (560 / wavelengthNm) ** 5 * (Math.expm1(c2 / (t * 560)) / Math.expm1(c2 / (t * wavelengthNm)));
}

/** A Gaussian line of unit area with a given full width at half maximum (FWHM = 2√(2 ln 2)·σ). */
export function gaussianLine(wavelengthNm: number, centreNm: number, fwhmNm: number): number {
  const sigma = fwhmNm / (2 * Math.sqrt(2 * Math.LN2));
  const z = (wavelengthNm - centreNm) / sigma;
  return Math.exp(-0.5 * z * z) / (sigma * Math.sqrt(2 * Math.PI));
}

/** Cool-white phosphor LED (project model): a 450 nm blue line, FWHM 20 nm, and a 560 nm phosphor band, FWHM 110 nm, with 3× its power. */
export const WHITE_LED = { blueNm: 450, blueFwhmNm: 20, phosphorNm: 560, phosphorFwhmNm: 110, phosphorToBlue: 3 } as const;

function whiteLed(wavelengthNm: number): number {
  const w = WHITE_LED;
  return (gaussianLine(wavelengthNm, w.blueNm, w.blueFwhmNm) + w.phosphorToBlue * gaussianLine(wavelengthNm, w.phosphorNm, w.phosphorFwhmNm)) / (1 + w.phosphorToBlue);
}

function interpolatePoints(points: readonly { wavelengthNm: number; power: number }[], wavelengthNm: number): number {
  const first = points[0]!;
  const last = points[points.length - 1]!;
  if (wavelengthNm < first.wavelengthNm || wavelengthNm > last.wavelengthNm) return 0;
  let i = 1;
  while (points[i]!.wavelengthNm < wavelengthNm) i++;
  const a = points[i - 1]!;
  const b = points[i]!;
  return a.power + ((wavelengthNm - a.wavelengthNm) / (b.wavelengthNm - a.wavelengthNm)) * (b.power - a.power);
}

/**
 * The relative spectral power of an illuminant at a wavelength, any scale. A monochromatic illuminant has
 * no density: callers handle it as a single line (see radiometry.ts); here it returns 0.
 */
export function relativePower(illuminant: Illuminant, wavelengthNm: number): number {
  switch (illuminant.type) {
    case 'cie-a':
      return illuminantARelativePower(wavelengthNm);
    case 'cie-d65':
      return d65RelativePower(wavelengthNm);
    case 'led-white':
      return whiteLed(wavelengthNm);
    case 'led-horticultural':
      return (
        illuminant.redShare * gaussianLine(wavelengthNm, illuminant.redNm, illuminant.widthNm) +
        (1 - illuminant.redShare) * gaussianLine(wavelengthNm, illuminant.blueNm, illuminant.widthNm)
      );
    case 'nir':
      return gaussianLine(wavelengthNm, illuminant.centreNm, illuminant.widthNm);
    case 'spectral':
      return interpolatePoints(illuminant.points, wavelengthNm);
    case 'monochromatic':
      return 0;
  }
}

/** A short name for messages: "CIE illuminant A", "a 850 nm NIR LED (40 nm wide)". */
export function illuminantName(illuminant: Illuminant): string {
  switch (illuminant.type) {
    case 'cie-a':
      return 'CIE illuminant A (2856 K)';
    case 'cie-d65':
      return 'CIE D65 daylight';
    case 'led-white':
      return 'a white LED';
    case 'led-horticultural':
      return `a red/blue grow light (${illuminant.redNm}/${illuminant.blueNm} nm)`;
    case 'nir':
      return `a ${illuminant.centreNm} nm NIR LED (${illuminant.widthNm} nm wide)`;
    case 'monochromatic':
      return `light at ${illuminant.wavelengthNm} nm only`;
    case 'spectral':
      return 'a measured spectrum';
  }
}
