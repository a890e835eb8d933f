import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { toTensor } from '../src/tolerance/degrade.js';
import { listImages, loadImages, type InputSize } from '../src/tolerance/images.js';
import { measureTolerance } from '../src/tolerance/measure.js';
import { openModel } from '../src/tolerance/runtime.js';
import { exportOnnx } from '../tests/support/onnx-export.js';
import { mobileNetV2 } from '../tests/support/paper-networks.js';
import { writeStripeCards } from '../tests/support/stripe-classifier.js';
import type { BenchFigure } from './figure.js';

const TARGET_RATIO = 0.5;

/**
 * Tolerance measurement on one core: a 224×224 MobileNetV2 classifier (weights zero; the arithmetic is the same)
 * over generated cards, 3 blur and 2 noise levels in reference mode. Baseline: onnxruntime alone on the same
 * tensors, prepared beforehand, in the same run. The figure is renders-and-inferences per second.
 */
export async function run(): Promise<BenchFigure[]> {
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-bench-tolerance-'));
  try {
    const size: InputSize = { channels: 3, widthPx: 224, heightPx: 224 };
    await writeStripeCards(join(dir, 'images'), 224, [2, 4, 8], [0.6]);
    const weights = join(dir, 'mobilenet-v2.onnx');
    writeFileSync(weights, exportOnnx(mobileNetV2()));
    const images = await loadImages(join(dir, 'images'), 'images', await listImages(join(dir, 'images'), 'images'), size);
    const runner = await openModel(weights, 'mobilenet-v2.onnx');
    const dims = [1, 3, 224, 224];
    const tensors = images.map((img) => toTensor(img.pixels, size));
    await runner.run(tensors[0]!, dims); // warm-up
    const start = process.hrtime.bigint();
    const result = await measureTolerance({ images, size, runner, blurPx: [0, 2, 4], snrDb: [20, 40] });
    const toleranceS = Number(process.hrtime.bigint() - start) / 1e9;
    const bareStart = process.hrtime.bigint();
    for (let k = 0; k < result.inferences; k++) await runner.run(tensors[k % tensors.length]!, dims);
    const bareS = Number(process.hrtime.bigint() - bareStart) / 1e9;
    await runner.close();
    const rate = result.inferences / toleranceS;
    const bare = result.inferences / bareS;
    const ratio = Math.round((rate / bare) * 1000) / 1000;
    const r1 = (v: number) => Math.round(v * 10) / 10;
    return [
      { name: 'tolerance-images-per-s', value: r1(rate), unit: 'images/s', target: r1(bare * TARGET_RATIO), ratio, ok: ratio >= TARGET_RATIO },
      { name: 'tolerance-bare-runtime-images-per-s', value: r1(bare), unit: 'images/s', target: 0, ok: true },
    ];
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
