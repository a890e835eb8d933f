import { z } from 'zod';
import { isoTimeSchema } from '../../schema/common.js';

/** Query of a device's stored events: a time window (device clock; default the last day), one type, how many. */
export const deviceEventsQuerySchema = z.strictObject({
  from: isoTimeSchema.optional(),
  to: isoTimeSchema.optional(),
  type: z.string().regex(/^[a-z][a-z-]{0,40}$/, 'an event type such as telemetry or release-applied').optional(),
  limit: z.coerce.number().int().min(1).max(5000).optional(),
});
