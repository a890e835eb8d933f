import { z } from 'zod';
import { idSchema } from '../schema/common.js';
import { isValidDeviceId } from '../protocol/topics.js';
import { ROLES } from '../store/tokens.js';

/** Task names inside a release: the same slug rules as ids, so they are safe in topics and file names. */
export const taskNameSchema = idSchema;

export const releaseRequestSchema = z
  .strictObject({
    deviceClassId: idSchema,
    tasks: z
      .record(taskNameSchema, z.strictObject({ profileId: idSchema, revision: z.number().int().positive() }))
      .refine((t) => Object.keys(t).length > 0, { message: 'a release needs at least one task' })
      .refine((t) => Object.keys(t).length <= 64, { message: 'a release holds at most 64 tasks' }),
    defaultTask: taskNameSchema,
    applyPolicy: z.enum(['immediate', 'when-idle']).default('when-idle'),
    override: z.strictObject({ reason: z.string().trim().min(1, 'give the reason for overriding failed checks').max(2000) }).optional(),
    /** Limit the release to these devices of the class (signed into its audience); every device of the class when absent. */
    deviceIds: z.array(z.string().refine(isValidDeviceId, { message: 'not a device id' })).min(1).max(10_000).optional(),
  })
  .refine((r) => Object.hasOwn(r.tasks, r.defaultTask), { message: 'defaultTask must be one of the tasks', path: ['defaultTask'] });
export type ReleaseRequest = z.infer<typeof releaseRequestSchema>;

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
