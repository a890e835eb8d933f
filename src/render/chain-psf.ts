/**
 * The point-spread kernel of the validator's image chain (src/physics/mtf.ts) on the network-input pixel grid:
 * the inverse Fourier transform of the chain's optical transfer function — diffraction of the circular
 * pupil (Goodman eq. 6-32), Stokseth's defocus factor 2·J1(a)/a with a = π·b·ν·(1 − ν/ν_c), the pixel
 * aperture sinc(a·νx)·sinc(a·νy) and the motion smear sinc(m·νx) (Boreman 2001, §§1.4, 2.2–2.5) — taken with
 * their signs (the MTFs are their magnitudes), over the input's band |ν| ≤ ½ cycle per pixel. The downscale
 * is a change of pixel size, as in the image model; its resampling filter and aliasing are not modelled.
 */
import type { BlurKernel } from '../physics/blur-kernel.js';
import { diffractionMtf, type ImageChain } from '../physics/mtf.js';
import { jinc, sinc } from '../physics/special-functions.js';
import { umToMm } from '../physics/units.js';

/** Frequency samples per axis over one cycle per input pixel. */
const FREQUENCY_SAMPLES = 64;
const MAX_HALF_SIZE = 15;

/** The chain's transfer function (signed) at sensor frequencies fx, fy in cycles/mm. */
export function chainOtf(chain: ImageChain, fxCycPerMm: number, fyCycPerMm: number): number {
  const rho = Math.hypot(fxCycPerMm, fyCycPerMm);
  const x = rho / chain.cutoffCycPerMm;
  if (x >= 1) return 0;
  const diffraction = diffractionMtf(rho, chain.cutoffCycPerMm);
  const defocus = jinc(Math.PI * umToMm(chain.defocusBlurUm) * rho * (1 - x));
  const a = umToMm(chain.pixelApertureUm);
  const pixel = sinc(a * fxCycPerMm) * sinc(a * fyCycPerMm);
  const motion = sinc(umToMm(chain.motionUm) * fxCycPerMm);
  return diffraction * defocus * pixel * motion;
}

/** The kernel, `inputPxUm` micrometres of sensor per input pixel; its size covers the blur plus margin. */
export function chainPsfKernel(chain: ImageChain, inputPxUm: number, blurDiameterInputPx: number): BlurKernel {
  const half = Math.min(MAX_HALF_SIZE, Math.ceil(blurDiameterInputPx + chain.motionUm / inputPxUm / 2 + 2));
  const size = 2 * half + 1;
  const toMm = 1 / umToMm(inputPxUm); // cycles per input px → cycles per mm on the sensor
  const m = FREQUENCY_SAMPLES;
  const otf = new Float64Array(m * m);
  const freq = (k: number) => (k - m / 2) / m; // −½ … ½ cycles per input px
  for (let j = 0; j < m; j++) for (let i = 0; i < m; i++) otf[j * m + i] = chainOtf(chain, freq(i) * toMm, freq(j) * toMm);
  const weights = new Float64Array(size * size);
  let total = 0;
  for (let y = -half; y <= half; y++) {
    for (let x = -half; x <= half; x++) {
      let sum = 0;
      for (let j = 0; j < m; j++) {
        const cy = Math.cos(2 * Math.PI * freq(j) * y);
        const sy = Math.sin(2 * Math.PI * freq(j) * y);
        for (let i = 0; i < m; i++) {
          const phase = 2 * Math.PI * freq(i) * x;
          // cos(a + b) = cos a cos b − sin a sin b; the OTF is real and even.
          sum += otf[j * m + i]! * (Math.cos(phase) * cy - Math.sin(phase) * sy);
        }
      }
      weights[(y + half) * size + (x + half)] = sum;
      total += sum;
    }
  }
  for (let k = 0; k < weights.length; k++) weights[k]! /= total;
  return { size, weights };
}
