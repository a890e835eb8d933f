import { z } from 'zod';
import { fraction, finite, idSchema, nonNegative, positiveInt, precisionSchema } from './common.js';

const increasing = <T>(key: keyof T & string) => (points: T[]) =>
  points.every((p, i) => i === 0 || (p[key] as number) > (points[i - 1]![key] as number));

/** What a measured point rests on: how many images, and the 95 % Wilson score interval of the accuracy. */
const measuredFields = {
  images: positiveInt().optional(),
  interval95: z.tuple([fraction(), fraction()]).optional(),
};
export const blurCurvePointSchema = z.strictObject({ blurPx: nonNegative(), accuracy: fraction(), ...measuredFields });
export const snrCurvePointSchema = z.strictObject({ snrDb: finite(), accuracy: fraction(), ...measuredFields });
/**
 * What a measured curve's accuracy means: top-1 against labels, top-1 agreement with the model's own
 * prediction on the sharp image, or the share of images whose output map overlaps the sharp one's by IoU ≥ 0.5.
 */
export const curveMetricSchema = z.enum(['top1-vs-labels', 'top1-vs-sharp', 'iou50-vs-sharp']);

export const modelSchema = z.strictObject({
  kind: z.literal('model').optional(),
  id: idSchema,
  name: z.string().min(1).max(200),
  version: z.string().min(1).max(64),
  demoData: z.boolean().optional(),
  notes: z.string().max(4000).optional(),
  sha256: z.string().regex(/^[0-9a-f]{64}$/, 'must be 64 lower-case hex digits'),
  sizeBytes: z.number().int().nonnegative(),
  inputWidthPx: positiveInt(),
  inputHeightPx: positiveInt(),
  networkId: idSchema,
  /**
   * Where the network's cost comes from: its network document (the default), or the weights file itself
   * (`weightsFile`, an ONNX file, path relative to this document); then a declared network must match it.
   */
  networkFrom: z.enum(['document', 'weights']).optional(),
  weightsFile: z.string().min(1).max(500).optional(),
  precision: precisionSchema,
  /** Accuracy measured by the user on their own data at increasing total blur (pixels, blur-spot diameter). */
  accuracyVsBlur: z
    .array(blurCurvePointSchema)
    .min(2)
    .refine(increasing<{ blurPx: number }>('blurPx'), { message: 'points must be in strictly increasing blurPx' })
    .optional(),
  /** Accuracy measured at increasing signal-to-noise ratio (dB). */
  accuracyVsSnr: z
    .array(snrCurvePointSchema)
    .min(2)
    .refine(increasing<{ snrDb: number }>('snrDb'), { message: 'points must be in strictly increasing snrDb' })
    .optional(),
  curveMetric: curveMetricSchema.optional(),
});

export type Model = z.infer<typeof modelSchema>;
