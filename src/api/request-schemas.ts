import { z } from 'zod';
import { idSchema } from '../schema/common.js';
import { isValidDeviceId } from '../protocol/topics.js';
import { ROLES } from '../store/tokens.js';

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

const isoTime = z.iso.datetime({ offset: true });

export const auditQuerySchema = z.strictObject({
  actor: z.string().max(300).optional(),
  action: z.string().max(100).optional(),
  target: z.string().max(300).optional(),
  from: isoTime.optional(),
  to: isoTime.optional(),
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
