import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import ort from 'onnxruntime-node';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { discKernel, kernelMtfAlongX } from '../../src/physics/blur-kernel.js';
import { wilsonInterval } from '../../src/physics/wilson-interval.js';
import { convolve, toTensor } from '../../src/tolerance/degrade.js';
import { validate } from '../../src/validate/index.js';
import { writeStripeCards, writeStripeModel, type StripeCard } from '../support/stripe-classifier.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

const tmp = mkdtempSync(join(tmpdir(), 'ocellus-tolerance-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
const SIZE = 64;
let cards: StripeCard[];
let model: ReturnType<typeof writeStripeModel>;
beforeAll(async () => {
  cards = await writeStripeCards(join(tmp, 'images'), SIZE);
  writeFileSync(join(tmp, 'labels.csv'), 'image,label\n' + cards.map((c) => `${c.name},${c.label}`).join('\n') + '\n');
  model = writeStripeModel(tmp, SIZE);
});

async function ocellus(...args: string[]) {
  const io = captureIo(tmp);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err() };
}
const base = () => ['tolerance', '--model', model.modelFile, '--weights', model.weightsFile, '--images', 'images'];

/** J1 by its power series (Abramowitz & Stegun 9.1.10), enough terms for arguments below 20. */
function besselJ1(x: number): number {
  let sum = 0;
  let term = x / 2;
  for (let m = 0; m < 40; m++) {
    sum += term;
    term *= -(x * x) / 4 / ((m + 1) * (m + 2));
  }
  return sum;
}

describe('the CPU runtime', () => {
  it('onnxruntime-node loads its CPU binary with its install script disabled in package.json', async () => {
    const pkg = JSON.parse(readFileSync(join(import.meta.dirname, '..', '..', 'package.json'), 'utf8'));
    expect(pkg.allowScripts['onnxruntime-node']).toBe(false);
    expect(ort.listSupportedBackends().map((b) => b.name)).toContain('cpu');
    const session = await ort.InferenceSession.create(model.weightsFile, { executionProviders: ['cpu'] });
    const out = await session.run({ input: new ort.Tensor('float32', new Float32Array(3 * SIZE * SIZE).fill(0.5), [1, 3, SIZE, SIZE]) });
    // A flat card: both gradients 0, so the logits are [0, 0, threshold] and the class is "flat".
    expect(Array.from(out[session.outputNames[0]!]!.data as Float32Array)).toEqual([0, 0, expect.closeTo(0.05, 6)]);
    await session.release();
  });
});

describe('Wilson score interval (Newcombe, Statistics in Medicine 17, 1998, Table I, method 3; from memory)', () => {
  it('81/263 gives 0.2553–0.3662; 15/148 gives 0.0624–0.1605; 0/20 gives 0–0.1611; 1/29 gives 0.0061–0.1718', () => {
    const cases: Array<[number, number, number, number]> = [[81, 263, 0.2553, 0.3662], [15, 148, 0.0624, 0.1605], [0, 20, 0, 0.1611], [1, 29, 0.0061, 0.1718]];
    for (const [k, n, low, high] of cases) {
      const w = wilsonInterval(k, n);
      expect(w.low).toBeCloseTo(low, 4);
      expect(w.high).toBeCloseTo(high, 4);
    }
  });
  it('refuses zero trials and successes beyond the trials', () => {
    expect(() => wilsonInterval(0, 0)).toThrow('trials must be a whole number ≥ 1');
    expect(() => wilsonInterval(5, 4)).toThrow('successes must lie in 0…4');
  });
});

describe('the point-spread function used for rendering', () => {
  it('a point source through the 4 px disc keeps its energy: the kernel sums to 1, and so does the convolved image', async () => {
    const k = discKernel(4);
    expect(k.weights.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 12);
    const size = { channels: 1 as const, widthPx: 33, heightPx: 33 };
    const point = new Uint8Array(33 * 33);
    point[16 * 33 + 16] = 255;
    const out = await convolve(point, size, k);
    const energy = out.reduce((a, b) => a + b, 0) / 255;
    // 8-bit rounding of the 49 kernel taps moves the sum by at most 49 × 0.5 DN.
    expect(Math.abs(energy - 1)).toBeLessThanOrEqual((49 * 0.5) / 255);
  });

  it('its MTF matches the image model 2·J1(πbν)/(πbν)·sinc(ν) of a disc and a pixel aperture at 0.05, 0.1 and 0.2 cycles/px (Boreman, ch. 2) within 0.01', () => {
    const b = 4;
    const k = discKernel(b);
    for (const nu of [0.05, 0.1, 0.2]) {
      const a = Math.PI * b * nu;
      const model = ((2 * besselJ1(a)) / a) * (Math.sin(Math.PI * nu) / (Math.PI * nu));
      expect(Math.abs(kernelMtfAlongX(k, nu) - model)).toBeLessThan(0.01);
    }
  });

  it('zero blur and no noise leave the image unchanged', async () => {
    const size = { channels: 3 as const, widthPx: 4, heightPx: 2 };
    const pixels = Uint8Array.from({ length: 24 }, (_, i) => i * 10);
    expect(discKernel(0).size).toBe(1);
    const same = await convolve(pixels, size, discKernel(0));
    expect(Array.from(same)).toEqual(Array.from(pixels));
    const t = toTensor(same, size);
    // N×C×H×W: channel 0 of pixel 1 is interleaved value 3.
    expect(t[1]).toBeCloseTo(30 / 255, 6);
    expect(t[8]).toBeCloseTo(10 / 255, 6);
  });
});

describe('ocellus tolerance on generated stripe cards and a fixed-weight classifier', () => {
  it('with labels: 1.0 on sharp cards, falling monotonically with blur and with noise, each point with its count and Wilson interval', async () => {
    const r = await ocellus(...base(), '--labels', 'labels.csv', '--blur-px', '0,1,2,3,4,6,8', '--snr-db', '10,15,20,30,40', '--json', '--out', 'measured.json');
    expect(r.err).toBe('');
    expect(r.code).toBe(0);
    const j = JSON.parse(r.out);
    expect(j.metric).toBe('top1-vs-labels');
    expect(j.psf).toContain('uniform blur disc');
    const blur = j.accuracyVsBlur.map((p: { accuracy: number }) => p.accuracy);
    const snr = j.accuracyVsSnr.map((p: { accuracy: number }) => p.accuracy);
    expect(blur[0]).toBe(1);
    for (let i = 1; i < blur.length; i++) expect(blur[i]).toBeLessThanOrEqual(blur[i - 1]);
    expect(blur.at(-1)).toBeLessThan(0.5);
    // SNR rises along the curve: accuracy must not fall as the noise drops.
    for (let i = 1; i < snr.length; i++) expect(snr[i]).toBeGreaterThanOrEqual(snr[i - 1]);
    expect(snr[0]).toBeLessThan(1);
    for (const p of [...j.accuracyVsBlur, ...j.accuracyVsSnr]) {
      expect(p.images).toBe(cards.length);
      const w = wilsonInterval(Math.round(p.accuracy * p.images), p.images);
      expect(p.interval95).toEqual([w.low, w.high]);
    }
    const written = JSON.parse(readFileSync(join(tmp, 'measured.json'), 'utf8'));
    expect(written.accuracyVsBlur).toEqual(j.accuracyVsBlur);
    expect(written.curveMetric).toBe('top1-vs-labels');
    expect(written.sha256).toBe(model.sha256);
  });

  it('without labels, agreement with the model\'s own sharp-image prediction is 1.0 at zero blur', async () => {
    const r = await ocellus(...base(), '--reference-predictions', '--blur-px', '0,3,8', '--snr-db', '10,40', '--json');
    expect(r.code).toBe(0);
    const j = JSON.parse(r.out);
    expect(j.metric).toBe('top1-vs-sharp');
    expect(j.accuracyVsBlur[0]).toMatchObject({ blurPx: 0, accuracy: 1 });
    expect(j.accuracyVsBlur[2].accuracy).toBeLessThan(1);
  });

  it('a profile whose predicted blur exceeds the measured tolerance fails validation; one within it passes', async () => {
    const r = await ocellus(...base(), '--labels', 'labels.csv', '--blur-px', '0,1,2,3,4,6,8', '--snr-db', '10,40', '--json');
    const measured = JSON.parse(r.out);
    // The task asks for 0.9: on the measured curve (1.0 at 2 px, 0.84 at 3 px) that is 2.625 px.
    expect(measured.blurUnit).toBe('input-px');
    // Focused at 1 m, with the working range reaching in to 0.30 m or to 0.35 m (validator image model).
    const withCurve = (nearDistanceM: number) =>
      checkOf(validate(fixture({ model: { accuracyVsBlur: measured.accuracyVsBlur, blurUnit: measured.blurUnit }, profile: { camera: { focusDistanceM: 1 } }, task: { nearDistanceM, farDistanceM: 1.1 } })), 'blur-over-range');
    const blurry = withCurve(0.3); // worst equivalent blur 2.94 input px
    expect(blurry.limit).toBeCloseTo(2.625, 6);
    expect(blurry.unit).toBe('input px');
    expect(blurry.status).toBe('fail');
    const sharper = withCurve(0.35); // 2.35 input px: over the 2 px default, within the measured 2.625 px
    expect(sharper.actual).toBeGreaterThan(2);
    expect(sharper.status).toBe('pass');
  });

  it('an image that cannot be decoded is an error naming the file, exit 2', async () => {
    writeFileSync(join(tmp, 'broken.png'), 'not a png at all');
    const { mkdirSync, copyFileSync } = await import('node:fs');
    mkdirSync(join(tmp, 'bad-images'), { recursive: true });
    writeFileSync(join(tmp, 'bad-images', 'broken.png'), 'not a png at all');
    copyFileSync(join(tmp, 'images', cards[0]!.name), join(tmp, 'bad-images', cards[0]!.name));
    const r = await ocellus('tolerance', '--model', model.modelFile, '--weights', model.weightsFile, '--images', 'bad-images', '--reference-predictions');
    expect(r.code).toBe(2);
    expect(r.err).toContain('bad-images/broken.png cannot be decoded as an image');
  });

  it('a labels file naming an image not in the folder is an error naming the file and line, exit 2', async () => {
    writeFileSync(join(tmp, 'wrong-labels.csv'), `image,label\n${cards.map((c) => `${c.name},${c.label}`).join('\n')}\nmissing-card.png,1\n`);
    const r = await ocellus(...base(), '--labels', 'wrong-labels.csv');
    expect(r.code).toBe(2);
    expect(r.err).toContain(`wrong-labels.csv:${cards.length + 2}:1: image "missing-card.png" is not in the image folder`);
  });

  it('weights whose sha256 differs from the model document are refused, exit 2', async () => {
    writeFileSync(join(tmp, 'other.onnx'), readFileSync(model.weightsFile).subarray(0, 100));
    const r = await ocellus('tolerance', '--model', model.modelFile, '--weights', 'other.onnx', '--images', 'images', '--reference-predictions');
    expect(r.code).toBe(2);
    expect(r.err).toContain(`but model stripe-model declares ${model.sha256}`);
  });

  it('labels and reference mode together, or neither, is a usage error', async () => {
    const both = await ocellus(...base(), '--labels', 'labels.csv', '--reference-predictions');
    expect(both.code).toBe(2);
    expect(both.err).toContain('give exactly one of --labels FILE.csv or --reference-predictions');
    const badLevels = await ocellus(...base(), '--reference-predictions', '--blur-px', '0,-1');
    expect(badLevels.code).toBe(2);
    expect(badLevels.err).toContain("--blur-px must list at least two numbers ≥ 0");
  });
});
