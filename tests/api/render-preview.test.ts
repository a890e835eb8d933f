/**
 * POST /api/v1/render-preview: the console's "what the robot sees". The PNG must be the very render of
 * `ocellus render` (src/render: the validator's PSF at that distance and the sensor noise), at the model's
 * input size, and the sample image is bounded in bytes and pixels with a clear refusal naming the field.
 */
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { profilePsf } from '../../src/render/psf.js';
import { renderSeen } from '../../src/render/render-image.js';
import { PREVIEW_MAX_IMAGE_BYTES } from '../../src/profiles/preview.js';
import { deviceClassSchema, modelSchema, networkSchema, profileSchema, taskSchema } from '../../src/schema/index.js';
import { createHarness, deviceClass, goodProfile, model, network, removeDir, seedCatalog, task, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
let sample: Buffer;

/** A 320×240 card of vertical black and white bars 8 px wide: sharp edges that blur visibly. */
async function stripeCard(width = 320, height = 240): Promise<Buffer> {
  const raw = Buffer.alloc(width * height * 3);
  for (let y = 0; y < height; y++) for (let x = 0; x < width; x++) raw.fill(Math.floor(x / 8) % 2 ? 255 : 0, (y * width + x) * 3, (y * width + x) * 3 + 3);
  return sharp(raw, { raw: { width, height, channels: 3 } }).png().toBuffer();
}

beforeAll(async () => {
  h = createHarness(tempDataDir());
  await seedCatalog(h, { profiles: [] });
  sample = await stripeCard();
});
afterAll(() => {
  h.closeStore();
  removeDir(h.dir);
});

const preview = (body: unknown, token: string | null = h.tokens.viewer) => h.call('POST', '/api/v1/render-preview', { body, token });

describe('render preview', () => {
  it('answers the PNG that ocellus render makes for the same profile, image and distance, at the model\'s input size', async () => {
    const res = await preview({ profile: goodProfile, image: sample.toString('base64'), distanceM: 0.3 });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('image/png');
    const png = Buffer.from(await res.arrayBuffer());
    const meta = await sharp(png).metadata();
    expect([meta.width, meta.height]).toEqual([model.inputWidthPx, model.inputHeightPx]);
    const input = {
      profile: profileSchema.parse(goodProfile),
      task: taskSchema.parse(task),
      deviceClass: deviceClassSchema.parse(deviceClass),
      model: modelSchema.parse(model),
      network: networkSchema.parse(network),
    };
    const psf = profilePsf(input, 0.3, task.luminanceMinCdM2);
    const expected = await renderSeen(sample, 'sample', { channels: 3, widthPx: model.inputWidthPx, heightPx: model.inputHeightPx }, psf, 1);
    expect(png.equals(expected)).toBe(true);
    const figures = JSON.parse(res.headers.get('x-ocellus-preview')!);
    expect(figures).toMatchObject({ inputPx: [128, 128], distanceM: 0.3, blurSpotInputPx: psf.blurSpotInputPx });
  });

  it('a distance far from focus renders a blurrier image than one at focus', async () => {
    const contrast = async (distanceM: number) => {
      const res = await preview({ profile: { ...goodProfile, camera: { ...goodProfile.camera, fNumber: 2 } }, image: sample.toString('base64'), distanceM, luminanceCdM2: 3500 });
      expect(res.status).toBe(200);
      const { data } = await sharp(Buffer.from(await res.arrayBuffer())).greyscale().raw().toBuffer({ resolveWithObject: true });
      let sum = 0;
      for (let i = 1; i < data.length; i++) sum += Math.abs(data[i]! - data[i - 1]!);
      return sum;
    };
    // Focused at 0.48 m (fixture): the edges at 0.48 m keep more contrast than at 0.1 m.
    expect(await contrast(0.48)).toBeGreaterThan((await contrast(0.1)) * 1.2);
  });

  it('an image of more than 4096×4096 pixels is refused with 413, naming the field and the limit', async () => {
    const big = await sharp({ create: { width: 5000, height: 4000, channels: 3, background: { r: 80, g: 120, b: 60 } } }).png().toBuffer();
    const res = await preview({ profile: goodProfile, image: big.toString('base64'), distanceM: 0.5 });
    expect(res.status).toBe(413);
    const body = (await res.json()) as { error: string; issues: Array<{ path: string }> };
    expect(body.error).toBe('the sample image is 5000×4000 px; at most 16777216 pixels (4096×4096)');
    expect(body.issues[0]!.path).toBe('image');
  });

  it(`an image of more than ${PREVIEW_MAX_IMAGE_BYTES} bytes is refused naming the field and the limit`, async () => {
    const res = await preview({ profile: goodProfile, image: Buffer.alloc(PREVIEW_MAX_IMAGE_BYTES + 3).toString('base64'), distanceM: 0.5 });
    expect(res.status).toBe(400);
    const body = (await res.json()) as { issues: Array<{ path: string; message: string }> };
    expect(body.issues).toContainEqual({ path: 'image', message: 'the sample image may be at most 4 MiB' });
  });

  it('bytes that are not an image, and a profile naming a model that is not stored, are 400s naming the field', async () => {
    const notImage = await preview({ profile: goodProfile, image: Buffer.from('greenhouse notes').toString('base64'), distanceM: 0.5 });
    expect(notImage.status).toBe(400);
    const a = (await notImage.json()) as { error: string; issues: Array<{ path: string }> };
    expect(a.error).toMatch(/^the sample image cannot be read: /);
    expect(a.issues[0]!.path).toBe('image');
    const noModel = await preview({ profile: { ...goodProfile, modelId: 'no-such-model' }, image: sample.toString('base64'), distanceM: 0.5 });
    expect(noModel.status).toBe(400);
    expect(await noModel.text()).toContain("no model 'no-such-model' is stored");
  });

  it('needs a token', async () => {
    expect((await preview({ profile: goodProfile, image: sample.toString('base64'), distanceM: 0.5 }, null)).status).toBe(401);
  });
});
