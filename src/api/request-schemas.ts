import { z } from 'zod';
import { idSchema, isoTimeSchema } from '../schema/common.js';
import { isValidDeviceId } from '../protocol/topics.js';
import { ROLES } from '../store/tokens.js';
import { profileSchema } from '../schema/profile.js';
import { PREVIEW_MAX_IMAGE_BYTES, PREVIEW_MAX_IMAGE_MIB } from '../profiles/preview.js';

export const tagSchema = z.string().regex(/^[A-Za-z0-9][A-Za-z0-9._:-]{0,63}$/, 'tags are 1-64 characters of letters, digits, ".", "_", ":" or "-"');

export const enrolRequestSchema = z.strictObject({
  id: z.string().refine(isValidDeviceId, {
    message: 'device ids are 1-64 characters of letters, digits, ".", "_" or "-", starting with a letter or digit',
  }),
  deviceClassId: idSchema,
  tags: z.array(tagSchema).max(32).default([]),
});

export const assignRequestSchema = z.strictObject({ releaseId: idSchema });

export const tokenRequestSchema = z.strictObject({
  role: z.enum(ROLES),
  label: z.string().trim().min(1).max(200).optional(),
});

export const auditQuerySchema = z.strictObject({
  actor: z.string().max(300).optional(),
  action: z.string().max(100).optional(),
  target: z.string().max(300).optional(),
  from: isoTimeSchema.optional(),
  to: isoTimeSchema.optional(),
  limit: z.coerce.number().int().min(1).max(1000).optional(),
});

export const deviceQuerySchema = z.strictObject({
  class: idSchema.optional(),
  tag: tagSchema.optional(),
  online: z.enum(['true', 'false']).optional(),
});

export const diffQuerySchema = z.strictObject({
  from: z.coerce.number().int().positive(),
  to: z.coerce.number().int().positive(),
});

export const weightsQuerySchema = z.strictObject({
  sha256: z.string().regex(/^[0-9a-f]{64}$/, 'must be 64 lower-case hex digits').optional(),
});

export const releaseQuerySchema = z.strictObject({ deviceClass: idSchema.optional() });

/** Base64 length of PREVIEW_MAX_IMAGE_BYTES bytes. */
const PREVIEW_MAX_BASE64 = Math.ceil(PREVIEW_MAX_IMAGE_BYTES / 3) * 4;

/** POST /render-preview: a profile (saved or not), a sample image as base64, and the object distance. */
export const renderPreviewRequestSchema = z.strictObject({
  profile: profileSchema,
  distanceM: z.number().positive().max(1000),
  luminanceCdM2: z.number().positive().optional(),
  seed: z.number().int().optional(),
  image: z
    .string()
    .min(1, 'give the sample image, base64-encoded')
    .max(PREVIEW_MAX_BASE64, `the sample image may be at most ${PREVIEW_MAX_IMAGE_MIB} MiB`)
    .regex(/^[A-Za-z0-9+/]*={0,2}$/, 'must be base64 (A–Z, a–z, 0–9, +, /, = padding), without a data: prefix'),
});
