/** A sample image as the network would see it through a profile: resized to the input, blurred by the PSF, with the sensor's noise. */
import sharp from 'sharp';
import { convolve, normalSource, toTensor } from '../tolerance/degrade.js';
import { decodeImage, type InputSize } from '../tolerance/images.js';
import type { ProfilePsf } from './psf.js';

export async function renderSeen(file: string, shown: string, size: InputSize, psf: ProfilePsf, seed = 1): Promise<Buffer> {
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
