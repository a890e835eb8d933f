/**
 * Measured tolerance: every image rendered at each blur level (no noise) and each noise level (no blur),
 * run through the model, scored, and summarised per level as accuracy, image count and a 95 % Wilson
 * score interval. The point-spread function is a uniform disc in input pixels integrated over the pixel
 * aperture (src/physics/blur-kernel.ts).
 */
import { discKernel } from '../physics/blur-kernel.js';
import { wilsonInterval } from '../physics/wilson-interval.js';
import type { z } from 'zod';
import type { curveMetricSchema } from '../schema/model.js';
import { IOU_AGREEMENT, classMap, isMap, mapIou, topClass } from './agreement.js';
import { convolve, normalSource, toTensor } from './degrade.js';
import type { InputSize, SampleImage } from './images.js';
import type { ModelOutput, ModelRunner } from './runtime.js';

export type CurveMetric = z.infer<typeof curveMetricSchema>;

export const PSF_DESCRIPTION = 'uniform blur disc of the given diameter in network-input pixels, integrated over the square pixel aperture';
export const NOISE_DESCRIPTION = 'additive Gaussian noise, σ = image mean / 10^(SNR/20), after the blur';

export interface MeasuredPoint {
  accuracy: number;
  images: number;
  interval95: [number, number];
}

export interface ToleranceResult {
  metric: CurveMetric;
  psf: string;
  noise: string;
  accuracyVsBlur: Array<{ blurPx: number } & MeasuredPoint>;
  accuracyVsSnr: Array<{ snrDb: number } & MeasuredPoint>;
  /** Renders plus inferences, for the rate. */
  inferences: number;
}

export interface ToleranceRequest {
  images: SampleImage[];
  size: InputSize;
  runner: ModelRunner;
  /** Class index per image name; without it, agreement with the sharp-image output. */
  labels?: Map<string, number>;
  blurPx: number[];
  snrDb: number[];
  seed?: number;
  onProgress?: (done: number, total: number) => void;
}

function point(correct: number, n: number): MeasuredPoint {
  const { low, high } = wilsonInterval(correct, n);
  return { accuracy: correct / n, images: n, interval95: [low, high] };
}

export async function measureTolerance(req: ToleranceRequest): Promise<ToleranceResult> {
  const { images, size, runner, labels } = req;
  const dims = [1, size.channels, size.heightPx, size.widthPx];
  const blurLevels = [...new Set(req.blurPx)].sort((a, b) => a - b);
  const snrLevels = [...new Set(req.snrDb)].sort((a, b) => a - b);
  const total = images.length * (blurLevels.length + snrLevels.length + (labels ? 0 : 1));
  let done = 0;
  const step = () => {
    done++;
    req.onProgress?.(done, total);
  };
  const infer = (pixels: Uint8Array, snrDb?: number, normal?: () => number) => runner.run(toTensor(pixels, size, snrDb, normal), dims);

  const sharp: ModelOutput[] = [];
  if (!labels) {
    for (const img of images) {
      sharp.push(await infer(img.pixels));
      step();
    }
  }
  const first = sharp[0];
  const metric: CurveMetric = labels ? 'top1-vs-labels' : first && isMap(first) ? 'iou50-vs-sharp' : 'top1-vs-sharp';
  const sharpMaps = metric === 'iou50-vs-sharp' ? sharp.map(classMap) : [];
  const score = (i: number, out: ModelOutput): boolean => {
    if (labels) return topClass(out) === labels.get(images[i]!.name);
    if (metric === 'iou50-vs-sharp') return mapIou(classMap(out), sharpMaps[i]!) >= IOU_AGREEMENT;
    return topClass(out) === topClass(sharp[i]!);
  };

  const accuracyVsBlur: ToleranceResult['accuracyVsBlur'] = [];
  for (const blurPx of blurLevels) {
    const kernel = discKernel(blurPx);
    let correct = 0;
    for (let i = 0; i < images.length; i++) {
      if (score(i, await infer(await convolve(images[i]!.pixels, size, kernel)))) correct++;
      step();
    }
    accuracyVsBlur.push({ blurPx, ...point(correct, images.length) });
  }
  const accuracyVsSnr: ToleranceResult['accuracyVsSnr'] = [];
  for (const snrDb of snrLevels) {
    let correct = 0;
    for (let i = 0; i < images.length; i++) {
      // The same noise field for an image at every level (common random numbers), so levels differ only in σ.
      const normal = normalSource((req.seed ?? 1) * 7919 + i);
      if (score(i, await infer(images[i]!.pixels, snrDb, normal))) correct++;
      step();
    }
    accuracyVsSnr.push({ snrDb, ...point(correct, images.length) });
  }
  return { metric, psf: PSF_DESCRIPTION, noise: NOISE_DESCRIPTION, accuracyVsBlur, accuracyVsSnr, inferences: done };
}
