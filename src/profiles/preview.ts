/**
 * "What the robot sees" for the console: a sample image sent with a (possibly unsaved) profile, rendered
 * exactly as `ocellus render` does (src/render): resized to the model's input, blurred by the profile's
 * point-spread function at the chosen distance, with the sensor's noise at the scene luminance. The image
 * is bounded in bytes and in pixels, so one request cannot tie up the server.
 */
import { mibToBytes } from '../physics/units.js';
import { profilePsf, type ProfilePsf } from '../render/psf.js';
import { imageSize, renderSeen } from '../render/render-image.js';
import type { Profile } from '../schema/profile.js';
import { refuse, type Outcome } from '../schema/refusal.js';
import type { Store } from '../store/store.js';
import { profileDocuments, type ProfileRefusalCode } from './check.js';

/** Largest encoded sample image: a phone photo fits, a raw dump does not. */
export const PREVIEW_MAX_IMAGE_MIB = 4;
export const PREVIEW_MAX_IMAGE_BYTES = mibToBytes(PREVIEW_MAX_IMAGE_MIB);
/** Largest decoded sample image, 4096 × 4096 pixels (it is resized to the network's input anyway). */
export const PREVIEW_MAX_IMAGE_PIXELS = 4096 * 4096;

export type PreviewRefusalCode = ProfileRefusalCode | 'image-too-large' | 'image-unreadable';

export interface PreviewRequest {
  profile: Profile;
  image: Buffer;
  distanceM: number;
  /** Scene luminance; the task's darkest when not given. */
  luminanceCdM2?: number;
  seed?: number;
}

export interface Preview {
  png: Buffer;
  psf: Pick<ProfilePsf, 'distanceM' | 'downscale' | 'blurSpotSensorPx' | 'blurSpotInputPx' | 'motionInputPx' | 'luminanceCdM2' | 'snrInputDb'>;
  inputPx: [number, number];
}

export async function renderProfilePreview(store: Store, request: PreviewRequest): Promise<Outcome<Preview, PreviewRefusalCode>> {
  if (request.image.length > PREVIEW_MAX_IMAGE_BYTES) {
    return refuse('image-too-large', `the sample image is ${request.image.length} bytes; at most ${PREVIEW_MAX_IMAGE_MIB} MiB`, [{ path: 'image', message: `at most ${PREVIEW_MAX_IMAGE_BYTES} bytes` }]);
  }
  const size = await imageSize(request.image);
  if ('problem' in size) return refuse('image-unreadable', `the sample image cannot be read: ${size.problem}`, [{ path: 'image', message: size.problem }]);
  if (size.widthPx * size.heightPx > PREVIEW_MAX_IMAGE_PIXELS) {
    return refuse('image-too-large', `the sample image is ${size.widthPx}×${size.heightPx} px; at most ${PREVIEW_MAX_IMAGE_PIXELS} pixels (4096×4096)`, [
      { path: 'image', message: `${size.widthPx * size.heightPx} pixels, more than ${PREVIEW_MAX_IMAGE_PIXELS}` },
    ]);
  }
  const found = profileDocuments(store, request.profile);
  if (!found.ok) return found;
  const { task, deviceClass, model, network } = found.value;
  const input = { profile: request.profile, task: task.document, deviceClass: deviceClass.document, model: model.document, network: network.document };
  const psf = profilePsf(input, request.distanceM, request.luminanceCdM2 ?? task.document.luminanceMinCdM2);
  const channels = network.document.input.channels === 1 ? 1 : 3;
  const inputPx: [number, number] = [model.document.inputWidthPx, model.document.inputHeightPx];
  let png: Buffer;
  try {
    png = await renderSeen(request.image, 'the sample image', { channels, widthPx: inputPx[0], heightPx: inputPx[1] }, psf, request.seed ?? 1);
  } catch (e) {
    return refuse('image-unreadable', (e as Error).message, [{ path: 'image', message: (e as Error).message }]);
  }
  const { distanceM, downscale, blurSpotSensorPx, blurSpotInputPx, motionInputPx, luminanceCdM2, snrInputDb } = psf;
  return { ok: true, value: { png, inputPx, psf: { distanceM, downscale, blurSpotSensorPx, blurSpotInputPx, motionInputPx, luminanceCdM2, snrInputDb } } };
}
