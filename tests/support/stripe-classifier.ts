import { createHash } from 'node:crypto';
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import sharp from 'sharp';
import { networkSchema, type Network } from '../../src/schema/index.js';
import { exportOnnx } from './onnx-export.js';

/**
 * A three-class classifier with fixed, hand-set weights, and the striped test cards it reads:
 * class 0 vertical stripes, class 1 horizontal stripes, class 2 a flat grey card.
 * A 2×2 convolution takes the horizontal and vertical differences (±, averaged over RGB), ReLU keeps both
 * signs apart, a global average gives the mean absolute gradient along x and along y, and a fully connected
 * layer compares them with a fixed threshold for "flat". Blur lowers the stripes' gradients below the
 * threshold (fine stripes first); noise raises a flat card's above it.
 */
export const FLAT_THRESHOLD = 0.05;

export function stripeNetwork(sizePx: number): Network {
  return networkSchema.parse({
    kind: 'network',
    id: `stripe-classifier-${sizePx}`,
    name: `Stripe classifier ${sizePx}`,
    input: { channels: 3, height: sizePx, width: sizePx },
    layers: [
      { id: 'gradients', op: 'conv', out: 4, kernel: 2, padding: 'valid', bias: false },
      { id: 'rectify', op: 'activation', fn: 'relu' },
      { id: 'mean', op: 'avgpool', global: true },
      { id: 'flatten', op: 'flatten' },
      { id: 'classes', op: 'fc', out: 3, bias: true },
    ],
  });
}

export function stripeClassifierOnnx(sizePx: number): Uint8Array {
  return exportOnnx(stripeNetwork(sizePx), {
    weightValues: (layer, role) => {
      if (layer === 'gradients' && role === 'weight') {
        // [out 4, in 3, 2, 2]: +dx, −dx, +dy, −dy of the channel mean.
        const w = new Float32Array(4 * 3 * 4);
        const at = (o: number, c: number, y: number, x: number) => ((o * 3 + c) * 2 + y) * 2 + x;
        for (let c = 0; c < 3; c++) {
          for (const [o, sign] of [[0, 1], [1, -1]] as const) {
            w[at(o, c, 0, 0)] = sign / 3;
            w[at(o, c, 0, 1)] = -sign / 3;
          }
          for (const [o, sign] of [[2, 1], [3, -1]] as const) {
            w[at(o, c, 0, 0)] = sign / 3;
            w[at(o, c, 1, 0)] = -sign / 3;
          }
        }
        return w;
      }
      if (layer === 'classes' && role === 'weight') return Float32Array.of(1, 1, 0, 0, 0, 0, 1, 1, 0, 0, 0, 0);
      if (layer === 'classes' && role === 'bias') return Float32Array.of(0, 0, FLAT_THRESHOLD);
      return undefined;
    },
  });
}

export interface StripeCard {
  name: string;
  label: 0 | 1 | 2;
}

/** Square-wave stripe cards of several periods and contrasts, and flat cards, as PNG files; returns their labels. */
export async function writeStripeCards(dir: string, sizePx: number, periodsPx = [2, 3, 4, 6, 8], contrasts = [0.3, 0.6]): Promise<StripeCard[]> {
  mkdirSync(dir, { recursive: true });
  const cards: StripeCard[] = [];
  const write = async (name: string, label: 0 | 1 | 2, value: (x: number, y: number) => number) => {
    const px = Buffer.alloc(sizePx * sizePx * 3);
    for (let y = 0; y < sizePx; y++) for (let x = 0; x < sizePx; x++) px.fill(Math.round(255 * value(x, y)), (y * sizePx + x) * 3, (y * sizePx + x) * 3 + 3);
    await sharp(px, { raw: { width: sizePx, height: sizePx, channels: 3 } }).png().toFile(join(dir, name));
    cards.push({ name, label });
  };
  const wave = (t: number, period: number, contrast: number) => 0.5 + (Math.floor((2 * t) / period) % 2 === 0 ? contrast / 2 : -contrast / 2);
  for (const p of periodsPx) {
    for (const c of contrasts) {
      await write(`vertical-p${p}-c${c}.png`, 0, (x) => wave(x, p, c));
      await write(`horizontal-p${p}-c${c}.png`, 1, (_x, y) => wave(y, p, c));
    }
  }
  for (const grey of [0.3, 0.4, 0.5, 0.6, 0.7]) await write(`flat-${grey}.png`, 2, () => grey);
  return cards;
}

export function writeStripeModel(dir: string, sizePx: number): { modelFile: string; weightsFile: string; sha256: string } {
  mkdirSync(dir, { recursive: true });
  const bytes = stripeClassifierOnnx(sizePx);
  const weightsFile = join(dir, 'stripe-classifier.onnx');
  writeFileSync(weightsFile, bytes);
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  const modelFile = join(dir, 'stripe-model.json');
  writeFileSync(modelFile, JSON.stringify({
    kind: 'model', id: 'stripe-model', name: 'Stripe classifier (test model with fixed weights)', version: '1', demoData: true,
    sha256, sizeBytes: bytes.length, inputWidthPx: sizePx, inputHeightPx: sizePx, networkId: `stripe-classifier-${sizePx}`, precision: 'int8',
  }, null, 2));
  return { modelFile, weightsFile, sha256 };
}
