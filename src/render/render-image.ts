/** A sample image as the network would see it through a profile: resized to the input, blurred by the PSF, with the sensor's noise. */
import sharp from 'sharp';
import { convolve, normalSource, toTensor } from '../tolerance/degrade.js';
import { decodeImage, type InputSize } from '../tolerance/images.js';
import type { ProfilePsf } from './psf.js';

/** `file` is a path or the encoded image's bytes (PNG, JPEG, WebP, …, whatever sharp decodes). */
export async function renderSeen(file: string | Buffer, shown: string, size: InputSize, psf: ProfilePsf, seed = 1): Promise<Buffer> {
  const pixels = await decodeImage(file, shown, size);
  const blurred = await convolve(pixels, size, psf.kernel);
  const noisy = Number.isFinite(psf.snrInputDb) ? toTensor(blurred, size, psf.snrInputDb, normalSource(seed)) : toTensor(blurred, size);
  const plane = size.widthPx * size.heightPx;
  const out = Buffer.alloc(plane * size.channels);
  for (let p = 0; p < plane; p++) {
    for (let c = 0; c < size.channels; c++) out[p * size.channels + c] = Math.max(0, Math.min(255, Math.round(noisy[c * plane + p]! * 255)));
  }
  return sharp(out, { raw: { width: size.widthPx, height: size.heightPx, channels: size.channels } }).png().toBuffer();
}

/** Width and height of an encoded image, read from its header without decoding it; null when it is not an image sharp reads. */
export async function imageSize(bytes: Buffer): Promise<{ widthPx: number; heightPx: number; format: string } | { problem: string }> {
  try {
    const m = await sharp(bytes).metadata();
    if (!m.width || !m.height) return { problem: 'its size cannot be read' };
    return { widthPx: m.width, heightPx: m.height, format: m.format ?? 'unknown' };
  } catch (e) {
    return { problem: (e as Error).message };
  }
}
