/**
 * What the network would see at one blur and noise level: the image convolved with a point-spread kernel
 * (sharp's convolution; 8-bit result, as a camera delivers), then additive Gaussian noise of
 * σ = mean / 10^(SNR/20) (SNR as signal over noise amplitude, EMVA 1288's definition), scaled to [0, 1] and
 * laid out N×C×H×W for the runtime.
 */
import sharp from 'sharp';
import type { BlurKernel } from '../physics/blur-kernel.js';
import type { InputSize } from './images.js';

/** Kernel weights in 1/2¹⁴ steps: libvips convolves 8-bit images with an integer mask, so a fractional one would be rounded away. */
const KERNEL_STEPS = 1 << 14;

export async function convolve(pixels: Uint8Array, size: InputSize, kernel: BlurKernel): Promise<Uint8Array> {
  if (kernel.size === 1) return pixels;
  const mask = Array.from(kernel.weights, (w) => Math.round(w * KERNEL_STEPS));
  const scale = mask.reduce((a, b) => a + b, 0);
  let pipeline = sharp(pixels, { raw: { width: size.widthPx, height: size.heightPx, channels: size.channels } })
    .convolve({ width: kernel.size, height: kernel.size, kernel: mask, scale, offset: 0 });
  // A grey image stays one channel (sharp would otherwise write it out as sRGB).
  if (size.channels === 1) pipeline = pipeline.toColourspace('b-w');
  const data = await pipeline.raw().toBuffer();
  if (data.length !== pixels.length) throw new Error(`convolution returned ${data.length} bytes for an image of ${pixels.length}`);
  return new Uint8Array(data.buffer, data.byteOffset, data.byteLength);
}

/** A seeded source of standard normal numbers (mulberry32 uniform, Box–Muller transform). */
export function normalSource(seed: number): () => number {
  let a = seed >>> 0;
  const uniform = (): number => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  return () => {
    const u = 1 - uniform();
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * uniform());
  };
}

export const noiseSigmaForSnr = (meanSignal: number, snrDb: number): number => meanSignal / 10 ** (snrDb / 20);

/** N×C×H×W floats in [0, 1]; with `snrDb`, noise is drawn from `normal`. */
export function toTensor(pixels: Uint8Array, size: InputSize, snrDb?: number, normal?: () => number): Float32Array {
  const { channels: c, widthPx: w, heightPx: h } = size;
  const plane = w * h;
  const out = new Float32Array(c * plane);
  let sum = 0;
  for (let i = 0; i < pixels.length; i++) sum += pixels[i]!;
  const sigma = snrDb === undefined ? 0 : noiseSigmaForSnr(sum / pixels.length / 255, snrDb);
  for (let p = 0; p < plane; p++) {
    for (let ch = 0; ch < c; ch++) {
      const v = pixels[p * c + ch]! / 255;
      out[ch * plane + p] = sigma > 0 ? v + sigma * normal!() : v;
    }
  }
  return out;
}
