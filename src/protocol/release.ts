import { z } from 'zod';
import { deviceClassSchema } from '../schema/device-class.js';
import { cameraSettingsSchema, memoryPartitionSchema } from '../schema/profile.js';
import { idSchema } from '../schema/common.js';

export const RELEASE_FORMAT = 'ocellus.release/1';

/** A model's weights as the device must fetch them: content-addressed, verified by sha256 before use. */
export const releaseModelSchema = z.strictObject({
  id: idSchema,
  version: z.string(),
  sha256: z.string().regex(/^[0-9a-f]{64}$/),
  sizeBytes: z.number().int().nonnegative(),
  /** Path on the server, relative to its base URL: /api/v1/models/<id>/weights. */
  weightsPath: z.string(),
});

/** The validator's prediction for one task profile on this device class, shipped so telemetry can be compared on site. */
export const predictionSchema = z.strictObject({
  inferenceMs: z.number().nonnegative(),
  inferenceMj: z.number().nonnegative(),
  frameLatencyMs: z.number().nonnegative(),
  frameEnergyMj: z.number().nonnegative(),
});

export const releaseTaskSchema = z.strictObject({
  profileId: idSchema,
  revision: z.number().int().positive(),
  camera: cameraSettingsSchema,
  memory: memoryPartitionSchema,
  model: releaseModelSchema,
  frameRateHz: z.number().positive(),
  predicted: predictionSchema,
});

export const releaseSchema = z.strictObject({
  format: z.literal(RELEASE_FORMAT),
  id: idSchema,
  /** Monotonic per device class; a device never goes back to a lower version unless the release says rollback. */
  version: z.number().int().positive(),
  deviceClassId: idSchema,
  deviceClass: deviceClassSchema,
  createdAt: z.string(),
  createdBy: z.string(),
  /** 'when-idle': the device defers the release while the robot reports that it is moving. */
  applyPolicy: z.enum(['immediate', 'when-idle']),
  defaultTask: z.string().min(1).max(64),
  tasks: z.record(z.string().min(1).max(64), releaseTaskSchema).refine((t) => Object.keys(t).length > 0, {
    message: 'a release needs at least one task',
  }),
  override: z.strictObject({ reason: z.string().min(1), by: z.string() }).optional(),
});

export type Release = z.infer<typeof releaseSchema>;
export type ReleaseTask = z.infer<typeof releaseTaskSchema>;

/** What travels on the bus and over HTTP: the release and an Ed25519 signature of its canonical JSON. */
export const signedReleaseSchema = z.strictObject({
  release: releaseSchema,
  /** base64 Ed25519 signature over canonicalJson(release). */
  signature: z.string().min(1),
  /** sha256 (hex, first 16 digits) of the signing public key's DER, so a device can tell keys apart. */
  keyId: z.string(),
});
export type SignedRelease = z.infer<typeof signedReleaseSchema>;

/**
 * A signed release as it travels: `raw` is the exact text that was stored and is sent (the bytes on the bus
 * are these, never a re-serialization of `parsed`), `parsed` its reading.
 */
export interface SignedReleaseText {
  raw: string;
  parsed: SignedRelease;
}

/** The text form of a freshly signed release (what storing it would keep). */
export function signedReleaseText(signed: SignedRelease): SignedReleaseText {
  return { raw: JSON.stringify(signed), parsed: signed };
}

/** Delivers a signed release to one device; the bus does it with a retained message on the device's release topic. */
export interface ReleasePublisher {
  publishRelease(deviceId: string, release: SignedReleaseText): Promise<void>;
}
