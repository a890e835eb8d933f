import { z } from 'zod';
import { isValidDeviceId } from '../../protocol/topics.js';
import { idSchema } from '../../schema/common.js';
import { WAVE_PERCENT_PATTERN } from './wave-text.js';

const deviceIdSchema = z.string().refine(isValidDeviceId, { message: 'not a valid device id' });
const tagSchema = z.string().regex(/^[A-Za-z0-9][A-Za-z0-9._:-]{0,63}$/, 'tags are 1-64 characters of letters, digits, ".", "_", ":" or "-"');

/** A wave's size: a number of devices, or a percentage ("10%") of all the rollout's devices. */
export const waveSizeSchema = z.union([
  z.number().int().positive(),
  z.string().regex(WAVE_PERCENT_PATTERN, 'a percentage is written like "10%" (0-100)'),
]);
export type WaveSize = z.infer<typeof waveSizeSchema>;

/** The default plan: one canary device, then 10 %, then the rest. */
export const DEFAULT_WAVES: readonly WaveSize[] = [1, '10%'];

export const gateSchema = z.strictObject({
  /** A device must report the release applied within this many seconds of its assignment. */
  applyTimeoutS: z.number().positive().max(7 * 86400).default(600),
  /** Telemetry frames each device must report on the new release before its latency is judged (0: no latency check). */
  telemetryFrames: z.number().int().min(0).max(10_000_000).default(300),
  /** Seconds after applying within which those frames must arrive. */
  telemetryTimeoutS: z.number().positive().max(7 * 86400).default(900),
  /** Largest accepted |measured ÷ (predicted × calibration) − 1| of mean inference latency. */
  latencyTolerance: z.number().positive().max(10).default(0.25),
});
export type GateSettings = z.output<typeof gateSchema>;

export const offlineSchema = z.strictObject({
  /** How long a wave waits for an offline device to come online before the policy applies. */
  waitS: z.number().min(0).max(7 * 86400).default(300),
  /** 'fail': the gate fails (the rollout pauses); 'skip': the device is left out of this rollout, unassigned. */
  then: z.enum(['fail', 'skip']).default('fail'),
});
export type OfflinePolicy = z.output<typeof offlineSchema>;

export const rolloutTargetSchema = z.union([
  z.strictObject({ deviceIds: z.array(deviceIdSchema).min(1).max(100_000) }),
  z.strictObject({
    /** Must be the release's device class when given. */
    deviceClassId: idSchema.optional(),
    /** Every tag must be on a device for it to be targeted. */
    tags: z.array(tagSchema).max(32).default([]),
  }),
]);
export type RolloutTarget = z.output<typeof rolloutTargetSchema>;

export const rolloutRequestSchema = z.strictObject({
  releaseId: idSchema,
  target: rolloutTargetSchema,
  waves: z.array(waveSizeSchema).min(1).max(100).default([...DEFAULT_WAVES]),
  gate: gateSchema.prefault({}),
  offline: offlineSchema.prefault({}),
  note: z.string().max(2000).optional(),
});
export type RolloutRequest = z.output<typeof rolloutRequestSchema>;
export type RolloutRequestInput = z.input<typeof rolloutRequestSchema>;

/** What is stored with a rollout: the request with its defaults filled in. */
export type RolloutSpec = RolloutRequest;

/**
 * Splits `total` devices into waves: each size in order (percentages of the total, rounded up, at least one
 * device), clamped to what is left; whatever remains after the list is the last wave. Empty waves are dropped.
 */
export function planWaves(total: number, sizes: readonly WaveSize[]): number[] {
  const waves: number[] = [];
  let left = total;
  for (const size of sizes) {
    if (left <= 0) break;
    const wanted = typeof size === 'number' ? size : Math.max(1, Math.ceil((Number.parseFloat(size) / 100) * total));
    const n = Math.min(left, wanted);
    waves.push(n);
    left -= n;
  }
  if (left > 0) waves.push(left);
  return waves;
}

/** The wave index of each position 0..total-1 under a plan. */
export function waveIndexes(plan: readonly number[]): number[] {
  return plan.flatMap((n, wave) => Array.from({ length: n }, () => wave));
}
