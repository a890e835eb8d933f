import { z } from 'zod';

export const checkStatusSchema = z.enum(['pass', 'warn', 'fail']);
export type CheckStatus = z.infer<typeof checkStatusSchema>;

/** Every check the validator makes, by its stable code (the planner, the console and the CLI refer to these). */
export const CHECK_CODES = [
  'physical-limit',
  'pixels-on-feature',
  'blur-over-range',
  'motion-blur',
  'rolling-shutter-skew',
  'snr-dark',
  'clipping-bright',
  'exposure-fits-frame',
  'latency',
  'throughput',
  'energy-per-frame',
  'average-power',
  'memory-fits-sram',
  'network-cost',
  'network-weights',
  'model-network',
  'model-precision',
  'model-task',
  'accuracy',
] as const;
export type CheckCode = (typeof CHECK_CODES)[number];

/** One finding of the validator: data, never an exception. Every figure carries its unit. */
export const checkSchema = z.object({
  code: z.enum(CHECK_CODES),
  status: checkStatusSchema,
  actual: z.number().nullable(),
  limit: z.number().nullable(),
  unit: z.string(),
  path: z.string(),
  message: z.string(),
  /** The figures the check used, by name (a figure that could not be computed is null). */
  figures: z.record(z.string(), z.number().nullable()).optional(),
});
export type Check = z.infer<typeof checkSchema>;

export const reportSchema = z.object({
  status: checkStatusSchema,
  checks: z.array(checkSchema),
  /** Figures the checks were computed from (per-stage latency and energy, blur curve...), for plots. */
  figures: z.record(z.string(), z.unknown()).optional(),
});
export type Report = z.infer<typeof reportSchema>;

/** The worst status wins: one fail fails the report, otherwise one warn warns it. */
export function worstStatus(statuses: Iterable<CheckStatus>): CheckStatus {
  let worst: CheckStatus = 'pass';
  for (const s of statuses) {
    if (s === 'fail') return 'fail';
    if (s === 'warn') worst = 'warn';
  }
  return worst;
}
