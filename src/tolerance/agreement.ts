/**
 * Scoring one output against a label or against the output on the sharp image. A classifier (output of
 * one value per class) scores top-1; an output map (N×C×H×W with H·W > 1, as a detector's or segmenter's)
 * scores whether the per-pixel arg-max maps overlap by intersection-over-union ≥ 0.5 over the non-zero classes
 * (a channel of one is thresholded at 0.5); IoU as in Everingham et al., "The PASCAL VOC Challenge", IJCV 2010.
 */
import type { ModelOutput } from './runtime.js';

export const isMap = (o: ModelOutput): boolean => o.dims.length === 4 && o.dims[2]! * o.dims[3]! > 1;

export function topClass(o: ModelOutput): number {
  let best = 0;
  for (let i = 1; i < o.data.length; i++) if (o.data[i]! > o.data[best]!) best = i;
  return best;
}

/** Per-pixel class of an N×C×H×W map: arg-max over C, or > 0.5 for one channel. */
export function classMap(o: ModelOutput): Uint16Array {
  const [, c, h, w] = o.dims as [number, number, number, number];
  const plane = h * w;
  const out = new Uint16Array(plane);
  for (let p = 0; p < plane; p++) {
    if (c === 1) {
      out[p] = o.data[p]! > 0.5 ? 1 : 0;
      continue;
    }
    let best = 0;
    for (let k = 1; k < c; k++) if (o.data[k * plane + p]! > o.data[best * plane + p]!) best = k;
    out[p] = best;
  }
  return out;
}

/** IoU of the foreground (non-zero class) pixels, class by class pooled; 1 when both maps are empty. */
export function mapIou(a: Uint16Array, b: Uint16Array): number {
  let inter = 0;
  let union = 0;
  for (let i = 0; i < a.length; i++) {
    const fa = a[i]! !== 0;
    const fb = b[i]! !== 0;
    if (fa && fb && a[i] === b[i]) inter++;
    if (fa || fb) union++;
  }
  return union === 0 ? 1 : inter / union;
}

export const IOU_AGREEMENT = 0.5;
