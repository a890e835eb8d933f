/**
 * Output size of a sliding window (convolution, pooling) over one spatial axis.
 * Standard form (Dumoulin & Visin, "A guide to convolution arithmetic for deep learning", 2016, relations 1–6,
 * generalised to dilation as in the ONNX Conv operator): out = floor((in + padBefore + padAfter − d·(k − 1) − 1) / s) + 1.
 * "same" keeps the project's earlier rule out = ceil(in / s), whatever the kernel.
 */
import type { Padding } from '../schema/network.js';

export type SizePair = number | [number, number];

/** [height, width] of a square-or-pair field. */
export const pairOf = (v: SizePair | undefined, fallback: number): [number, number] =>
  v === undefined ? [fallback, fallback] : typeof v === 'number' ? [v, v] : [v[0], v[1]];

export interface WindowAxis {
  sizePx: number;
  kernel: number;
  stride: number;
  dilation: number;
  padBefore: number;
  padAfter: number;
  ceil: boolean;
}

/** Output size along one axis; 0 or less means the window does not fit. */
export function windowOut(a: WindowAxis): number {
  const span = a.dilation * (a.kernel - 1) + 1;
  const room = a.sizePx + a.padBefore + a.padAfter - span;
  if (room < 0) return 0;
  const steps = a.ceil ? Math.ceil(room / a.stride) : Math.floor(room / a.stride);
  return steps + 1;
}

/** [top, left, bottom, right] of explicit or valid padding; undefined for "same". */
export function explicitPads(padding: Padding | undefined): [number, number, number, number] | undefined {
  if (padding === undefined || padding === 'same') return undefined;
  if (padding === 'valid') return [0, 0, 0, 0];
  return [padding[0], padding[1], padding[2], padding[3]];
}

/** Output [height, width] of a window over [height, width]. */
export function windowShape(
  inHw: [number, number],
  kernel: [number, number],
  stride: [number, number],
  dilation: [number, number],
  padding: Padding | undefined,
  ceil: boolean,
): [number, number] {
  const pads = explicitPads(padding);
  if (!pads) return [Math.ceil(inHw[0] / stride[0]), Math.ceil(inHw[1] / stride[1])];
  const [top, left, bottom, right] = pads;
  return [
    windowOut({ sizePx: inHw[0], kernel: kernel[0], stride: stride[0], dilation: dilation[0], padBefore: top, padAfter: bottom, ceil }),
    windowOut({ sizePx: inHw[1], kernel: kernel[1], stride: stride[1], dilation: dilation[1], padBefore: left, padAfter: right, ceil }),
  ];
}
