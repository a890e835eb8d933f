import { z } from 'zod';
import { idSchema } from '../../schema/common.js';

/**
 * The body of POST /plan. The options are the two a person tunes from the console; the rest of the
 * planner's options keep their defaults so one request stays within about a second of CPU.
 */
export const planRequestSchema = z.strictObject({
  taskId: idSchema,
  deviceClassId: idSchema,
  /** Models to consider; without it, every stored model of the accelerator's precision. */
  modelIds: z.array(idSchema).min(1, 'list at least one model, or leave modelIds out to consider them all').max(64).optional(),
  options: z
    .strictObject({
      /** Weight-buffer step of the memory partition search; 8 KiB or coarser keeps the grid bounded. */
      granuleKib: z.number().int().min(8).max(65_536).optional(),
      /** Near misses to return even when the front is not empty. */
      nearMisses: z.number().int().min(0).max(50).optional(),
    })
    .optional(),
});
export type PlanRequest = z.infer<typeof planRequestSchema>;
