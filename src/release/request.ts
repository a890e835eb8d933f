import { z } from 'zod';
import { isValidDeviceId } from '../protocol/topics.js';
import { idSchema } from '../schema/common.js';

/** Task names inside a release: the same slug rules as ids, so they are safe in topics and file names. */
export const taskNameSchema = idSchema;

/** What an operator asks for: stored profile revisions by task name, the default task and the apply policy. */
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
