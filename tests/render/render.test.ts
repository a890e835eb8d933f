import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { kernelMtfAlongX, sweptDiscKernel } from '../../src/physics/blur-kernel.js';
import { profilePsf } from '../../src/render/psf.js';
import { validate } from '../../src/validate/index.js';
import { writeStripeCards } from '../support/stripe-classifier.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

const repo = join(import.meta.dirname, '..', '..');
const tmp = mkdtempSync(join(tmpdir(), 'ocellus-render-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
beforeAll(async () => {
  await writeStripeCards(tmp, 96, [4], [0.6]);
});

/** J1 by its power series (Abramowitz & Stegun 9.1.10). */
function besselJ1(x: number): number {
  let sum = 0;
  let term = x / 2;
  for (let m = 0; m < 40; m++) {
    sum += term;
    term *= -(x * x) / 4 / ((m + 1) * (m + 2));
  }
  return sum;
}
const sinc = (x: number) => (x === 0 ? 1 : Math.sin(Math.PI * x) / (Math.PI * x));

describe('the profile PSF: blur disc swept by motion, over the pixel aperture', () => {
  it('its MTF along x is 2·J1(πbν)/(πbν)·sinc(mν)·sinc(ν) at 0.05, 0.1 and 0.15 cycles/px within 0.01 (Boreman, ch. 2: cascaded stages multiply)', () => {
    const b = 3;
    const m = 2.5;
    const k = sweptDiscKernel(b, m);
    expect(k.weights.reduce((s, w) => s + w, 0)).toBeCloseTo(1, 12);
    for (const nu of [0.05, 0.1, 0.15]) {
      const a = Math.PI * b * nu;
      const model = ((2 * besselJ1(a)) / a) * sinc(m * nu) * sinc(nu);
      expect(Math.abs(kernelMtfAlongX(k, nu) - model)).toBeLessThan(0.01);
    }
  });

  it('at the validator\'s worst distance the PSF carries the same blur spot as the blur-over-range check, scaled to the input', () => {
    const input = fixture({ profile: { camera: { focusDistanceM: 2 } } });
    const check = checkOf(validate(input), 'blur-over-range');
    const psf = profilePsf(input, 0.9);
    expect(psf.blurSpotSensorPx).toBeCloseTo(check.actual!, 6);
    // The fixture's sensor is 1000 px wide, its model's input 250 px: 4 sensor px per input px.
    expect(psf.downscale).toBe(4);
    expect(psf.blurSpotInputPx).toBeCloseTo(check.actual! / 4, 6);
    // Averaging 4 × 4 sensor pixels gains 20·log10(4) = 12.04 dB.
    expect(psf.snrInputDb - psf.snrSensorDb).toBeCloseTo(12.041, 3);
  });
});

describe('ocellus render', () => {
  it('writes the sample as a demo robot\'s network sees it: resized to the model input, blurrier than the sharp resize', async () => {
    const io = captureIo(repo);
    const out = join(tmp, 'seen.png');
    const code = await dispatch(['render', '--profile', 'profiles/greenhouse-demo/task-profiles/leaf-inspection-a.json', '--image', join(tmp, 'vertical-p4-c0.6.png'), '--distance-m', '0.3', '--out', out, '--json'], io);
    expect(io.err()).toBe('');
    expect(code).toBe(0);
    const j = JSON.parse(io.out());
    expect(existsSync(out)).toBe(true);
    const meta = await sharp(out).metadata();
    expect([meta.width, meta.height]).toEqual(j.input_px);
    expect(j.blur_spot_input_px).toBeGreaterThan(0);
    expect(j.psf_size_px).toBeGreaterThan(1);
    const gradient = async (file: string) => {
      const { data, info } = await sharp(file).removeAlpha().resize(j.input_px[0], j.input_px[1], { fit: 'fill' }).greyscale().raw().toBuffer({ resolveWithObject: true });
      let sum = 0;
      for (let y = 0; y < info.height; y++) for (let x = 1; x < info.width; x++) sum += Math.abs(data[y * info.width + x]! - data[y * info.width + x - 1]!);
      return sum;
    };
    expect(await gradient(out)).toBeLessThan(await gradient(join(tmp, 'vertical-p4-c0.6.png')));
  });

  it('an image that cannot be decoded is an error naming it, exit 2; a missing distance is a usage error', async () => {
    const { writeFileSync } = await import('node:fs');
    writeFileSync(join(tmp, 'leaf.jpg'), 'no jpeg here');
    const io = captureIo(repo);
    const code = await dispatch(['render', '--profile', 'profiles/greenhouse-demo/task-profiles/leaf-inspection-a.json', '--image', join(tmp, 'leaf.jpg'), '--distance-m', '0.3'], io);
    expect(code).toBe(2);
    expect(io.err()).toContain('leaf.jpg cannot be decoded as an image');
    const io2 = captureIo(repo);
    expect(await dispatch(['render', '--profile', 'x.json', '--image', 'y.png'], io2)).toBe(2);
    expect(io2.err()).toContain('missing --distance-m');
  });
});
