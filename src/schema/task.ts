import { z } from 'zod';
import { fraction, finite, idSchema, nonNegative, positive } from './common.js';
import { sceneSchema } from './light.js';

export const taskSchema = z
  .strictObject({
    kind: z.literal('task').optional(),
    id: idSchema,
    name: z.string().min(1).max(200),
    demoData: z.boolean().optional(),
    notes: z.string().max(4000).optional(),
    nearDistanceM: positive(),
    farDistanceM: positive(),
    /** Smallest feature the task must resolve, and the pixels it needs across that feature. */
    featureSizeMm: positive(),
    pixelsPerFeatureMin: positive(),
    maxRelativeSpeedMPerS: nonNegative(),
    luminanceMinCdM2: positive(),
    luminanceMaxCdM2: positive(),
    frameRateHz: positive(),
    minAccuracy: fraction(),
    latencyBudgetMs: positive(),
    energyBudgetMjPerFrame: positive(),
    /** Motion blur tolerated, in pixels; defaults to the blur tolerance derived from the model. */
    maxMotionBlurPx: positive().optional(),
    /** Fastest turn of the camera about the vertical axis while the task runs (robot or arm yaw), degrees per second. */
    maxYawRateDegPerS: nonNegative().default(0),
    /** Fastest tilt of the camera about the horizontal axis (pitching over floor joints, arm moves), degrees per second. */
    maxPitchRateDegPerS: nonNegative().default(0),
    /** Modulation of the feature against its background (Michelson contrast, 0–1); used to read the MTF at the feature. */
    featureContrast: fraction().optional(),
    /**
     * Rolling-shutter skew tolerated top to bottom of the frame, sensor pixels. Defaults to the feature's own size in
     * sensor pixels at the near end: beyond that the feature is sheared by more than its width.
     */
    maxRollingSkewPx: positive().optional(),
    /** Lowest acceptable SNR at the darkest scene; 20 dB is a project default, not a standard. */
    minSnrDb: finite().default(20),
    /** The light of the scene as a spectrum; without it, light is taken as one design wavelength. */
    scene: sceneSchema.optional(),
  })
  .refine((t) => t.farDistanceM >= t.nearDistanceM, {
    message: 'farDistanceM must be at least nearDistanceM',
    path: ['farDistanceM'],
  })
  .refine((t) => t.luminanceMaxCdM2 >= t.luminanceMinCdM2, {
    message: 'luminanceMaxCdM2 must be at least luminanceMinCdM2',
    path: ['luminanceMaxCdM2'],
  });

export type Task = z.infer<typeof taskSchema>;
