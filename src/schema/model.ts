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

/** The pixels a blur curve is measured in: the sensor's, or the network input's after the downscale. */
export const blurUnitSchema = z.enum(['sensor-px', 'input-px']);
export type BlurUnit = z.infer<typeof blurUnitSchema>;

const blurCurveSchema = z
  .array(blurCurvePointSchema)
  .min(2)
  .refine(increasing<{ blurPx: number }>('blurPx'), { message: 'points must be in strictly increasing blurPx' });
const snrCurveSchema = z
  .array(snrCurvePointSchema)
  .min(2)
  .refine(increasing<{ snrDb: number }>('snrDb'), { message: 'points must be in strictly increasing snrDb' });

/** Curves measured for one task, where they differ from the model's own. */
export const taskCurvesSchema = z.strictObject({
  taskId: idSchema,
  accuracyVsBlur: blurCurveSchema.optional(),
  accuracyVsSnr: snrCurveSchema.optional(),
});

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
  /**
   * Accuracy measured by the user on their own data at increasing blur: the diameter of the uniform disc with the
   * same MTF50 as the whole image chain, in `blurUnit` pixels.
   */
  accuracyVsBlur: blurCurveSchema.optional(),
  /**
   * Pixels of the accuracy-vs-blur curves. New documents should say "input-px" (the network's input after the
   * downscale). Left out, a curve is read as "sensor-px", which is what files written before this field meant,
   * and the validator says so.
   */
  blurUnit: blurUnitSchema.optional(),
  /** Accuracy measured at increasing signal-to-noise ratio (dB). */
  accuracyVsSnr: snrCurveSchema.optional(),
  curveMetric: curveMetricSchema.optional(),
  /**
   * Tasks the model was trained and measured for. A profile pairing it with another task fails `model-task`, and
   * the planner leaves it out. Left out (files written before this field), every task is allowed with a warning.
   */
  measuredForTaskIds: z.array(idSchema).min(1).optional(),
  /** Curves per task where they differ from the model's own (each task must be among measuredForTaskIds). */
  taskCurves: z.array(taskCurvesSchema).optional(),
}).superRefine((m, ctx) => {
  const seen = new Set<string>();
  m.taskCurves?.forEach((c, i) => {
    if (seen.has(c.taskId)) ctx.addIssue({ code: 'custom', path: ['taskCurves', i, 'taskId'], message: `task ${c.taskId} has curves twice` });
    seen.add(c.taskId);
    if (!m.measuredForTaskIds?.includes(c.taskId)) {
      ctx.addIssue({ code: 'custom', path: ['taskCurves', i, 'taskId'], message: `task ${c.taskId} is not among measuredForTaskIds` });
    }
  });
});

export type Model = z.infer<typeof modelSchema>;
