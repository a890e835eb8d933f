/**
 * Point-spread kernels on the pixel grid of a network's input. A uniform blur disc of diameter b pixels
 * (geometric defocus, thin lens: Smith, "Modern Optical Engineering", ch. 6; its MTF 2·J1(πbν)/(πbν),
 * Boreman, "Modulation Transfer Function in Optical and Electro-Optical Systems", ch. 2) combined with the
 * square pixel aperture (MTF |sinc(ν)|, same source): each kernel weight is the disc's energy falling on
 * that pixel's 1×1 area, integrated by sub-sampling. The weights sum to 1; b = 0 is the identity.
 */

export interface BlurKernel {
  /** Odd width = height, in pixels. */
  size: number;
  /** Row-major weights, summing to 1. */
  weights: Float64Array;
}

/** Sub-samples per pixel side for the area integral: error in any weight below 1/(2·16) of the edge pixels' share. */
const SUBSAMPLES = 16;

/** The disc's energy on each pixel: a pixel-aperture-integrated uniform disc of `blurDiameterPx`. */
export function discKernel(blurDiameterPx: number): BlurKernel {
  if (!(blurDiameterPx >= 0) || !Number.isFinite(blurDiameterPx)) throw new RangeError(`blur diameter must be a finite number ≥ 0, got ${blurDiameterPx}`);
  const radius = blurDiameterPx / 2;
  // Below a tenth of a pixel the disc lies inside the centre pixel: the identity.
  if (radius < 0.05) return { size: 1, weights: Float64Array.of(1) };
  const half = Math.ceil(radius + 0.5);
  const size = 2 * half + 1;
  const weights = new Float64Array(size * size);
  const step = 1 / SUBSAMPLES;
  let total = 0;
  for (let py = -half; py <= half; py++) {
    for (let px = -half; px <= half; px++) {
      let inside = 0;
      for (let sy = 0; sy < SUBSAMPLES; sy++) {
        const y = py - 0.5 + (sy + 0.5) * step;
        for (let sx = 0; sx < SUBSAMPLES; sx++) {
          const x = px - 0.5 + (sx + 0.5) * step;
          if (x * x + y * y <= radius * radius) inside++;
        }
      }
      weights[(py + half) * size + (px + half)] = inside;
      total += inside;
    }
  }
  for (let i = 0; i < weights.length; i++) weights[i]! /= total;
  return { size, weights };
}

/** The kernel's transfer function at spatial frequency ν (cycles per pixel) along x: its discrete-time Fourier transform. */
export function kernelMtfAlongX(kernel: BlurKernel, cyclesPerPx: number): number {
  const half = (kernel.size - 1) / 2;
  let re = 0;
  let im = 0;
  for (let y = 0; y < kernel.size; y++) {
    for (let x = 0; x < kernel.size; x++) {
      const w = kernel.weights[y * kernel.size + x]!;
      const phase = -2 * Math.PI * cyclesPerPx * (x - half);
      re += w * Math.cos(phase);
      im += w * Math.sin(phase);
    }
  }
  return Math.hypot(re, im);
}

