import { z } from 'zod';
import { deviceClassSchema } from '../schema/device-class.js';
import { cameraSettingsSchema, memoryPartitionSchema } from '../schema/profile.js';
import { idSchema } from '../schema/common.js';
import { keyRotationSchema } from './key-rotation.js';
import { DEVICE_ID_PATTERN } from './topics.js';

/**
 * Format 2 adds a signed audience, an expiry and, for a release that restores older content, the
 * release it re-issues. Format 1 (releases stored before) stays readable: it is treated as meant for
 * every device of its class and as never expiring, and is held to the same sequence rule.
 */
export const RELEASE_FORMAT = 'ocellus.release/2';
export const LEGACY_RELEASE_FORMAT = 'ocellus.release/1';

/** A model's weights as the device must fetch them: content-addressed, verified by sha256 before use. */
export const releaseModelSchema = z.strictObject({
  id: idSchema,
  version: z.string(),
  sha256: z.string().regex(/^[0-9a-f]{64}$/),
  sizeBytes: z.number().int().nonnegative(),
  /**
   * Path on the server, relative to its base URL: /api/v1/models/<id>/weights?sha256=<sha256>. Format 1
   * releases name the model's latest weights without the hash; the agent adds the hash itself.
   */
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

/** Which devices a release is for: its device class and, when listed, only these device ids. */
export const audienceSchema = z.strictObject({
  deviceClassId: idSchema,
  deviceIds: z.array(z.string().regex(DEVICE_ID_PATTERN)).min(1).max(10_000).optional(),
});
export type ReleaseAudience = z.infer<typeof audienceSchema>;

const isoTime = z.string().datetime({ offset: true });

export const releaseSchema = z
  .strictObject({
    format: z.enum([RELEASE_FORMAT, LEGACY_RELEASE_FORMAT]),
    id: idSchema,
    /**
     * The release's sequence number: strictly increasing per device class. A device never applies a lower
     * one than it has applied; going back to older content is a new release (reissueOf) with a higher number.
     */
    version: z.number().int().positive(),
    deviceClassId: idSchema,
    deviceClass: deviceClassSchema,
    createdAt: z.string(),
    createdBy: z.string(),
    /** Format 2: who may apply it, and until when a device may start applying it. */
    audience: audienceSchema.optional(),
    expiresAt: isoTime.optional(),
    /** Format 2: this release carries the content of an older one (a rollback). */
    reissueOf: z.strictObject({ releaseId: idSchema, version: z.number().int().positive() }).optional(),
    /** 'when-idle': the device defers the release while the robot reports that it is moving. */
    applyPolicy: z.enum(['immediate', 'when-idle']),
    defaultTask: z.string().min(1).max(64),
    tasks: z.record(z.string().min(1).max(64), releaseTaskSchema).refine((t) => Object.keys(t).length > 0, {
      message: 'a release needs at least one task',
    }),
    override: z.strictObject({ reason: z.string().min(1), by: z.string() }).optional(),
  })
  .superRefine((r, ctx) => {
    if (r.format !== RELEASE_FORMAT) return;
    if (!r.audience) ctx.addIssue({ code: 'custom', path: ['audience'], message: `a ${RELEASE_FORMAT} release needs an audience` });
    else if (r.audience.deviceClassId !== r.deviceClassId) {
      ctx.addIssue({ code: 'custom', path: ['audience', 'deviceClassId'], message: `must equal deviceClassId (${r.deviceClassId})` });
    }
    if (!r.expiresAt) ctx.addIssue({ code: 'custom', path: ['expiresAt'], message: `a ${RELEASE_FORMAT} release needs an expiry` });
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
  /**
   * Key rotations from the first signing key to the one that signed this release, each signed by the key
   * before it; a device that trusts an earlier key follows it. Absent while the first key signs.
   */
  keyChain: z.array(keyRotationSchema).max(32).optional(),
});
export type SignedRelease = z.infer<typeof signedReleaseSchema>;

/** The weights URL path a device fetches: always by content, whatever the release's format wrote. */
export function weightsPathByHash(model: { id: string; sha256: string }): string {
  return `/api/v1/models/${encodeURIComponent(model.id)}/weights?sha256=${model.sha256}`;
}

/**
 * A task of a release by name, own properties only: `constructor` or `__proto__` are not tasks, whatever
 * the object's prototype holds.
 */
export function taskOf(release: Pick<Release, 'tasks'>, name: string): ReleaseTask | undefined {
  return Object.hasOwn(release.tasks, name) ? release.tasks[name] : undefined;
}

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
