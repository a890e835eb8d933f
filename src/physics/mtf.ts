/**
 * The image-quality model in the frequency domain: the modulation transfer function (MTF) of the whole image
 * chain is the product of its linear stages (Boreman, *Modulation Transfer Function in Optical and
 * Electro-Optical Systems*, 2001, ch. 1): diffraction at the working f-number, defocus, the pixel's aperture and
 * linear motion during the exposure. Frequencies are in cycles per millimetre on the sensor; lengths on the
 * sensor are in micrometres. Aberrations and field curvature are not modelled (an ideal thin lens on axis).
 */
import { JINC_HALF, SINC_HALF, jinc, sinc } from './special-functions.js';
import { mmToUm, nmToMm, umToMm } from './units.js';

/** The stages of one image chain, each as the length or frequency its MTF needs. */
export interface ImageChain {
  /** Incoherent diffraction cutoff 1/(λ·N_w), cycles/mm. */
  cutoffCycPerMm: number;
  /** Diameter of the geometric defocus disc on the sensor, µm. */
  defocusBlurUm: number;
  /** Width of the pixel's square light-collecting area, pitch·√fillFactor, µm. */
  pixelApertureUm: number;
  /** Length of the image's linear smear during the exposure, µm. */
  motionUm: number;
}

/** Each stage's MTF at one frequency, and their product. */
export interface MtfParts {
  diffraction: number;
  defocus: number;
  pixel: number;
  motion: number;
  system: number;
}

/** Working f-number N_w = N·(1 + m) at magnification m (thin lens, pupil magnification 1; Ray, *Applied Photographic Optics*, 2002). */
export function workingFNumber(fNumber: number, magnification: number): number {
  return fNumber * (1 + magnification);
}

/** Magnification of a thin lens focused at s, m = f/(s − f) (Gaussian lens equation); Infinity when s ≤ f. */
export function magnificationAtFocus(focalLengthMm: number, focusDistanceMm: number): number {
  if (!(focusDistanceMm > focalLengthMm)) return Infinity;
  return focalLengthMm / (focusDistanceMm - focalLengthMm);
}

/** Incoherent cutoff ν_c = 1/(λ·N_w), cycles/mm (Goodman, *Introduction to Fourier Optics*, §6.3). */
export function diffractionCutoffCycPerMm(wavelengthNm: number, workingFNumberValue: number): number {
  return 1 / (nmToMm(wavelengthNm) * workingFNumberValue);
}

/** Side of the square light-collecting area of a pixel, pitch·√fillFactor (common practice for a square aperture). */
export function pixelApertureUm(pixelPitchUm: number, fillFactor: number): number {
  return pixelPitchUm * Math.sqrt(fillFactor);
}

/**
 * Diffraction-limited MTF of a circular pupil, (2/π)(acos x − x·√(1−x²)), x = ν/ν_c, 0 beyond the cutoff
 * (Goodman, *Introduction to Fourier Optics*, 3rd ed., eq. 6-32).
 */
export function diffractionMtf(freqCycPerMm: number, cutoffCycPerMm: number): number {
  const x = freqCycPerMm / cutoffCycPerMm;
  if (x >= 1) return 0;
  if (x <= 0) return 1;
  return (2 / Math.PI) * (Math.acos(x) - x * Math.sqrt(1 - x * x));
}

/** Geometric MTF of a uniform blur disc of diameter b, |2·J1(π·b·ν)/(π·b·ν)| (Boreman 2001, §2.3). */
export function geometricDefocusMtf(freqCycPerMm: number, blurDiameterUm: number): number {
  return Math.abs(jinc(Math.PI * umToMm(blurDiameterUm) * freqCycPerMm));
}

/**
 * Defocus factor of Stokseth's approximation to the defocused, diffracting circular pupil: the disc transform
 * with its argument shrunk by (1 − ν/ν_c), |2·J1(a)/a|, a = π·b·ν·(1 − ν/ν_c) (Stokseth, JOSA 59, 1969; b is
 * the geometric blur diameter, 8·N·W020). Multiplied by the exact diffraction MTF it tends to Hopkins (1955)
 * where blur and Airy disc are comparable, and to the geometric disc where defocus dominates.
 */
export function defocusMtf(freqCycPerMm: number, blurDiameterUm: number, cutoffCycPerMm: number): number {
  const x = freqCycPerMm / cutoffCycPerMm;
  if (x >= 1) return 1;
  return Math.abs(jinc(Math.PI * umToMm(blurDiameterUm) * freqCycPerMm * (1 - x)));
}

/** MTF of a square pixel aperture of width a, |sinc(a·ν)| (Boreman 2001, §2.2). */
export function pixelMtf(freqCycPerMm: number, apertureUm: number): number {
  return Math.abs(sinc(umToMm(apertureUm) * freqCycPerMm));
}

/** MTF of uniform linear motion of length m during the exposure, along the motion, |sinc(m·ν)| (Boreman 2001, §2.5). */
export function motionMtf(freqCycPerMm: number, motionUm: number): number {
  return Math.abs(sinc(umToMm(motionUm) * freqCycPerMm));
}

/** Every stage's MTF at ν and their product (a cascade of linear stages multiplies MTFs; Boreman 2001, §1.4). */
export function mtfParts(freqCycPerMm: number, chain: ImageChain): MtfParts {
  const diffraction = diffractionMtf(freqCycPerMm, chain.cutoffCycPerMm);
  const defocus = defocusMtf(freqCycPerMm, chain.defocusBlurUm, chain.cutoffCycPerMm);
  const pixel = pixelMtf(freqCycPerMm, chain.pixelApertureUm);
  const motion = motionMtf(freqCycPerMm, chain.motionUm);
  return { diffraction, defocus, pixel, motion, system: diffraction * defocus * pixel * motion };
}

/** System MTF at ν: the product of diffraction, defocus, pixel aperture and motion (Boreman 2001, §1.4). */
export function systemMtf(freqCycPerMm: number, chain: ImageChain): number {
  return (
    diffractionMtf(freqCycPerMm, chain.cutoffCycPerMm) *
    defocusMtf(freqCycPerMm, chain.defocusBlurUm, chain.cutoffCycPerMm) *
    pixelMtf(freqCycPerMm, chain.pixelApertureUm) *
    motionMtf(freqCycPerMm, chain.motionUm)
  );
}

/** x = ν/ν_c where the diffraction MTF is ½ (≈ 0.4040). */
const DIFFRACTION_HALF = (() => {
  let a = 0;
  let b = 1;
  for (let i = 0; i < 80; i++) {
    const m = (a + b) / 2;
    if (diffractionMtf(m, 1) > 0.5) a = m;
    else b = m;
  }
  return (a + b) / 2;
})();

/** Lowest frequency where the Stokseth defocus factor falls to ½: the smaller root of π·b·ν·(1 − ν/ν_c) = JINC_HALF. */
function defocusHalfCycPerMm(blurMm: number, cutoff: number): number {
  if (!(blurMm > 0)) return Infinity;
  const disc = 1 - (4 * JINC_HALF) / (Math.PI * blurMm * cutoff);
  if (disc < 0) return Infinity;
  // (ν_c/2)(1 − √disc), written so that it stays exact for a large or infinite cutoff.
  return (2 * JINC_HALF) / (Math.PI * blurMm * (1 + Math.sqrt(disc)));
}

const LN_HALF = Math.log(0.5);

/**
 * MTF50: the lowest frequency where the system MTF falls to ½, cycles/mm. Below it every stage is on its main,
 * falling lobe, so the product falls too and the root is unique; it lies below the lowest of the stages' own
 * MTF50s. Found by the Illinois variant of false position on ln MTF (Dowell & Jarratt, BIT 11, 1971).
 */
export function mtf50CycPerMm(chain: ImageChain): number {
  const c = chain.cutoffCycPerMm;
  let hi = DIFFRACTION_HALF * c;
  const d = defocusHalfCycPerMm(umToMm(chain.defocusBlurUm), c);
  if (d < hi) hi = d;
  if (chain.pixelApertureUm > 0) hi = Math.min(hi, SINC_HALF / umToMm(chain.pixelApertureUm));
  if (chain.motionUm > 0) hi = Math.min(hi, SINC_HALF / umToMm(chain.motionUm));
  let a = 0;
  let fa = -LN_HALF; // ln 1 − ln ½
  let b = hi;
  let fb = Math.log(systemMtf(b, chain)) - LN_HALF;
  if (!(fb < 0)) return b;
  let side = 0;
  for (let i = 0; i < 60; i++) {
    const x = (a * fb - b * fa) / (fb - fa);
    const fx = Math.log(systemMtf(x, chain)) - LN_HALF;
    if (Math.abs(fx) < 1e-10 || b - a < 1e-10 * hi) return x;
    if (fx > 0) {
      a = x;
      fa = fx;
      if (side === 1) fb /= 2;
      side = 1;
    } else {
      b = x;
      fb = fx;
      if (side === -1) fa /= 2;
      side = -1;
    }
  }
  return (a + b) / 2;
}

/**
 * Equivalent blur diameter: the uniform disc whose (geometric) MTF50 equals the given one, b = u½/(π·ν50) with
 * 2·J1(u½)/u½ = ½ (a project definition built on the disc MTF of Boreman 2001, §2.3). A pure disc returns its own diameter.
 */
export function equivalentBlurDiameterUm(mtf50: number): number {
  if (!(mtf50 > 0)) return Infinity;
  return mmToUm(JINC_HALF / (Math.PI * mtf50));
}

/** Equivalent blur diameter of a whole chain, µm (equivalentBlurDiameterUm of its MTF50). */
export function chainBlurDiameterUm(chain: ImageChain): number {
  return equivalentBlurDiameterUm(mtf50CycPerMm(chain));
}

/** Each stage's own blur: the equivalent disc of that stage's MTF alone, µm (0 for a stage that is absent). */
export interface StageBlurUm {
  diffraction: number;
  defocus: number;
  pixel: number;
  motion: number;
}

/**
 * The equivalent blur of each stage taken alone, from its own MTF50 in closed form. The system MTF is at most
 * each factor, so the chain's equivalent blur is at least the largest of these.
 */
export function stageBlurDiametersUm(chain: ImageChain): StageBlurUm {
  const c = chain.cutoffCycPerMm;
  return {
    diffraction: equivalentBlurDiameterUm(DIFFRACTION_HALF * c),
    defocus: chain.defocusBlurUm > 0 ? equivalentBlurDiameterUm(defocusHalfCycPerMm(umToMm(chain.defocusBlurUm), c)) : 0,
    pixel: chain.pixelApertureUm > 0 ? equivalentBlurDiameterUm(SINC_HALF / umToMm(chain.pixelApertureUm)) : 0,
    motion: chain.motionUm > 0 ? equivalentBlurDiameterUm(SINC_HALF / umToMm(chain.motionUm)) : 0,
  };
}

/** Nyquist frequency of a sampling pitch, 1/(2p), cycles/mm (Shannon sampling theorem). */
export function nyquistCycPerMm(pitchUm: number): number {
  return 1 / (2 * umToMm(pitchUm));
}

/** The chain's MTF parts at `samples` evenly spaced frequencies from 0 to `maxCycPerMm`, for plots. */
export function mtfCurve(chain: ImageChain, maxCycPerMm: number, samples = 41): (MtfParts & { cycPerMm: number })[] {
  const out: (MtfParts & { cycPerMm: number })[] = [];
  for (let i = 0; i < samples; i++) {
    const cycPerMm = (i / (samples - 1)) * maxCycPerMm;
    out.push({ cycPerMm, ...mtfParts(cycPerMm, chain) });
  }
  return out;
}
