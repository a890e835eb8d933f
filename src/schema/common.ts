import { z } from 'zod';

/** A finite number: zod 4 already refuses NaN; this also refuses ±Infinity with a message that says so. */
export const finite = () => z.number().refine(Number.isFinite, { message: 'must be a finite number (not NaN or Infinity)' });
export const positive = () => finite().refine((v) => v > 0, { message: 'must be greater than 0' });
export const nonNegative = () => finite().refine((v) => v >= 0, { message: 'must be 0 or more' });
export const fraction = () =>
  finite().refine((v) => v >= 0 && v <= 1, { message: 'must be a fraction between 0 and 1' });
export const positiveInt = () => z.number().int().positive();

/** Identifiers: lower-case slugs, safe in URLs, file names and MQTT topic levels. */
export const idSchema = z
  .string()
  .regex(/^[a-z0-9][a-z0-9._-]{0,63}$/, 'must be 1-64 characters of a-z, 0-9, ".", "_" or "-", starting with a letter or digit');

export const precisionSchema = z.enum(['int8', 'fp16']);
export type Precision = z.infer<typeof precisionSchema>;

/** Bytes per stored element for each accelerator precision. */
export const BYTES_PER_ELEMENT: Record<Precision, number> = { int8: 1, fp16: 2 };

/** An ISO 8601 / RFC 3339 date-time with an offset (Z or ±hh:mm), as every message, query and record carries times. */
export const isoTimeSchema = z.iso.datetime({ offset: true });
