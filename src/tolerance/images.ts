/**
 * Sample images from a folder, decoded and resized to the network's input with sharp (libvips): one
 * interleaved 8-bit buffer per image. A file with an image extension that cannot be decoded is an error
 * naming it; other files in the folder are left out.
 */
import { readdir } from 'node:fs/promises';
import { extname, join } from 'node:path';
import sharp from 'sharp';
import { InputError } from '../schema/issues.js';

export const IMAGE_EXTENSIONS = ['.png', '.jpg', '.jpeg', '.webp', '.tif', '.tiff', '.gif', '.avif'];

export interface InputSize {
  channels: 1 | 3;
  widthPx: number;
  heightPx: number;
}

export interface SampleImage {
  /** Name relative to the folder, as a labels file names it. */
  name: string;
  /** Interleaved (h, w, c) 8-bit pixels at the input size. */
  pixels: Uint8Array;
}

export async function listImages(dir: string, shownDir: string): Promise<string[]> {
  let names: string[];
  try {
    names = await readdir(dir);
  } catch (e) {
    const reason = (e as NodeJS.ErrnoException).code === 'ENOENT' ? 'no such folder' : (e as Error).message;
    throw new InputError(`cannot read the image folder ${shownDir}: ${reason}`, [{ path: '(folder)', message: reason }], shownDir);
  }
  const images = names.filter((n) => IMAGE_EXTENSIONS.includes(extname(n).toLowerCase())).sort();
  if (images.length === 0) throw new InputError(`${shownDir} holds no images (${IMAGE_EXTENSIONS.join(', ')})`, [{ path: '(folder)', message: 'no images' }], shownDir);
  return images;
}

/** Decode one file to the input size, stretched to fill (as a camera frame is resized for the network). */
/** Decodes a file (path) or encoded bytes, resized to the network's input. */
export async function decodeImage(file: string | Buffer, shown: string, size: InputSize): Promise<Uint8Array> {
  try {
    let pipeline = sharp(file, { failOn: 'error' }).removeAlpha();
    pipeline = size.channels === 1 ? pipeline.toColourspace('b-w') : pipeline.toColourspace('srgb');
    const { data, info } = await pipeline.resize(size.widthPx, size.heightPx, { fit: 'fill' }).raw().toBuffer({ resolveWithObject: true });
    if (info.channels !== size.channels) throw new Error(`decoded to ${info.channels} channels, the network takes ${size.channels}`);
    return new Uint8Array(data.buffer, data.byteOffset, data.byteLength);
  } catch (e) {
    const reason = (e as Error).message;
    throw new InputError(`${shown} cannot be decoded as an image: ${reason}`, [{ path: '(file)', message: reason }], shown);
  }
}

export async function loadImages(dir: string, shownDir: string, names: string[], size: InputSize): Promise<SampleImage[]> {
  const out: SampleImage[] = [];
  for (const name of names) out.push({ name, pixels: await decodeImage(join(dir, name), join(shownDir, name), size) });
  return out;
}
