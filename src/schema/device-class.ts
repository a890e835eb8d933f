import { z } from 'zod';
import { cameraControlsSchema } from './camera-controls.js';
import { fraction, idSchema, nonNegative, positive, positiveInt, precisionSchema } from './common.js';

export const lensSchema = z.strictObject({
  focalLengthMm: positive(),
  /** Available f-number stops, widest (smallest) first. */
  fNumberStops: z
    .array(positive())
    .min(1)
    .refine((stops) => stops.every((s, i) => i === 0 || s > stops[i - 1]!), {
      message: 'f-number stops must be strictly increasing (widest aperture first)',
    }),
  nearestFocusM: positive(),
  focusSettleMsPerDioptre: nonNegative(),
  apertureStepMs: nonNegative().default(0),
});

export const sensorSchema = z.strictObject({
  widthPx: positiveInt(),
  heightPx: positiveInt(),
  pixelPitchUm: positive(),
  quantumEfficiency: fraction().refine((v) => v > 0, { message: 'must be greater than 0' }),
  fullWellE: positive(),
  darkNoiseE: nonNegative(),
  /** Overall system gain K at analog gain 1 (EMVA 1288 symbol K). */
  gainDnPerE: positive(),
  bitDepth: positiveInt().max(24),
  maxAnalogGain: positive().default(16),
  readoutMsPerFrame: nonNegative(),
  readoutEnergyPjPerPixel: nonNegative(),
  /** Wavelength used for diffraction and photon counts; 550 nm is the usual photopic choice (common practice). */
  designWavelengthNm: positive().default(550),
  /** How rows are exposed: all at once ("global"), or one after another during readout ("rolling"). */
  shutter: z.enum(['global', 'rolling']).default('global'),
  /**
   * Time between the starts of two successive rows of a rolling shutter, µs. When left out it follows from
   * readoutMsPerFrame / heightPx (the rows are read out evenly over the frame readout).
   */
  lineTimeUs: positive().optional(),
  /** Share of the pixel's area that collects light (a square active area of side pitch·√fillFactor); 1 for back-side illuminated sensors. */
  fillFactor: fraction().refine((v) => v > 0, { message: 'must be greater than 0' }).default(1),
});

export const ispSchema = z.strictObject({
  latencyMsPerFrame: nonNegative(),
  energyPjPerPixel: nonNegative(),
});

export const acceleratorSchema = z.strictObject({
  macUnits: positiveInt(),
  clockMhz: positive(),
  precision: precisionSchema,
  sramKib: positive(),
  dramBandwidthGbPerS: positive(),
  energyPjPerMac: nonNegative(),
  energyPjPerSramByte: nonNegative(),
  energyPjPerDramByte: nonNegative(),
  staticPowerMw: nonNegative(),
  flashReadMbPerS: positive(),
});

export const platformSchema = z.strictObject({
  powerBudgetW: positive(),
});

export const deviceClassSchema = z.strictObject({
  kind: z.literal('device-class').optional(),
  id: idSchema,
  name: z.string().min(1).max(200),
  demoData: z.boolean().optional(),
  notes: z.string().max(4000).optional(),
  lens: lensSchema,
  sensor: sensorSchema,
  isp: ispSchema,
  accelerator: acceleratorSchema,
  platform: platformSchema,
  /** Calibration tables from physical settings to the module's control codes (focus, gain, iris). */
  controls: cameraControlsSchema.optional(),
});

export type DeviceClass = z.infer<typeof deviceClassSchema>;
export type DeviceClassInput = z.input<typeof deviceClassSchema>;
