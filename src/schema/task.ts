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
