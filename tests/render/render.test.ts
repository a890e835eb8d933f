import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { kernelMtfAlongX } from '../../src/physics/blur-kernel.js';
import { systemMtf } from '../../src/physics/mtf.js';
import { profilePsf } from '../../src/render/psf.js';
import { blurCurveOf, imageSetup, worstPoint } from '../../src/validate/index.js';
import { writeStripeCards } from '../support/stripe-classifier.js';
import { fixture } from '../support/validate-fixtures.js';

const repo = join(import.meta.dirname, '..', '..');
const tmp = mkdtempSync(join(tmpdir(), 'ocellus-render-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
beforeAll(async () => {
  await writeStripeCards(tmp, 96, [4], [0.6]);
});

describe('the profile PSF: the validator\'s image chain on the input pixel grid', () => {
  // Focused at 2 m over 0.9–1.1 m, moving at 0.5 m/s: defocus, diffraction, pixel aperture and motion all count.
  const input = fixture({ profile: { camera: { focusDistanceM: 2 } }, task: { maxRelativeSpeedMPerS: 0.5 } });
  const setup = imageSetup(input.task, input.deviceClass, input.profile.camera.exposureUs, input.model.inputWidthPx);
  const worst = worstPoint(blurCurveOf(input.task, setup, input.profile.camera.fNumber, input.profile.camera.focusDistanceM));
  const psf = profilePsf(input, worst.distanceM);

  it('carries the same equivalent blur as the validator\'s worst point, in sensor and input pixels', () => {
    expect(psf.blurSpotSensorPx).toBeCloseTo(worst.totalPx, 6);
    expect(psf.blurSpotInputPx).toBeCloseTo(worst.totalInputPx, 6);
    // The fixture's sensor is 1000 px wide, its model's input 250 px: 4 sensor px per input px,
    // and averaging 4 × 4 sensor pixels gains 20·log10(4) = 12.04 dB.
    expect(psf.downscale).toBe(4);
    expect(psf.snrInputDb - psf.snrSensorDb).toBeCloseTo(12.041, 3);
  });

  it('a point source keeps its energy (the kernel sums to 1) and the kernel\'s MTF matches the image model\'s at 0.05, 0.15 and 0.3 cycles per input pixel within 0.02', () => {
    expect(psf.kernel.weights.reduce((s, w) => s + w, 0)).toBeCloseTo(1, 9);
    const inputPxMm = (setup.downscale * input.deviceClass.sensor.pixelPitchUm) / 1000;
    for (const nu of [0.05, 0.15, 0.3]) {
      expect(Math.abs(kernelMtfAlongX(psf.kernel, nu) - systemMtf(nu / inputPxMm, psf.chain))).toBeLessThan(0.02);
    }
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
