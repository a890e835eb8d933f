import { z } from 'zod';
import { cameraControlsSchema } from './camera-controls.js';
import { finite, fraction, idSchema, nonNegative, positive, positiveInt, precisionSchema } from './common.js';
import { fractionCurveSchema, robotLightSchema } from './light.js';

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
  // Spectral transmission: a flat value, an optional curve that replaces it, and an optional ideal IR cut.
  transmission: fraction().default(0.9),
  transmissionCurve: fractionCurveSchema.optional(),
  /** An ideal infrared-cut filter: nothing passes above this wavelength. */
  irCutNm: positive().optional(),
  /** Relative illumination apart from cos⁴ (mechanical vignetting), ISO 12232's v. */
  vignetting: fraction().default(0.98),
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
  // Spectral response and noise as an EMVA 1288 report gives them.
  /** QE against wavelength; replaces the flat `quantumEfficiency` for light when given. */
  quantumEfficiencyCurve: fractionCurveSchema.optional(),
  /** Input-referred read noise per analog gain, in increasing gain; replaces `darkNoiseE` when given. */
  readNoiseByGain: z
    .array(z.strictObject({ analogGain: positive(), readNoiseE: nonNegative() }))
    .min(1)
    .refine((pts) => pts.every((p, i) => i === 0 || p.analogGain > pts[i - 1]!.analogGain), { message: 'analog gains must be strictly increasing' })
    .optional(),
  darkCurrentEPerS: nonNegative().default(0),
  darkCurrentRefTempC: finite().default(25),
  /** Temperature rise that doubles the dark current; 7 °C is a project default (common practice: 6–8 °C). */
  darkCurrentDoublingC: positive().default(7),
  operatingTemperatureC: finite().optional(),
  /** Bits handed to the network after the ADC (e.g. 8 for an int8 input); defaults to the ADC's bit depth. */
  networkInputBits: positiveInt().max(24).optional(),
  /** The next exposure can run while the previous frame reads out (overlapped mode). */
  exposureDuringReadout: z.boolean().default(false),
  /** Power while exposing and reading out, on top of the readout energy per pixel, and between frames. */
  activePowerMw: nonNegative().default(0),
  idlePowerMw: nonNegative().default(0),
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
  idlePowerMw: nonNegative().default(0),
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
  /** Switched off between inferences; otherwise it draws `idlePowerMw` (default: the static power) while it waits. */
  powerGated: z.boolean().default(false),
  idlePowerMw: nonNegative().optional(),
  /** Share of the peak MAC rate each op kind reaches (default 1). */
  utilisation: z
    .strictObject({ conv: fractionAboveZero(), dwconv: fractionAboveZero(), fc: fractionAboveZero() })
    .partial()
    .default({}),
  /** Fixed cost of dispatching one layer. */
  layerOverheadUs: nonNegative().default(0),
  /** SRAM energy per byte by buffer size, in increasing size; replaces `energyPjPerSramByte` when given. */
  sramEnergyBySize: z
    .array(z.strictObject({ bufferKib: positive(), energyPjPerByte: nonNegative() }))
    .min(1)
    .refine((pts) => pts.every((p, i) => i === 0 || p.bufferKib > pts[i - 1]!.bufferKib), { message: 'buffer sizes must be strictly increasing' })
    .optional(),
});

function fractionAboveZero() {
  return fraction().refine((v) => v > 0, { message: 'must be greater than 0' });
}

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
  /** Lights carried by the robot; a task's scene switches one on by id. */
  lights: z
    .array(robotLightSchema)
    .superRefine((lights, ctx) => {
      lights.forEach((l, i) => {
        if (lights.findIndex((o) => o.id === l.id) !== i) ctx.addIssue({ code: 'custom', path: [i, 'id'], message: `duplicate light id "${l.id}"` });
      });
    })
    .optional(),
  /** Calibration tables from physical settings to the module's control codes (focus, gain, iris). */
  controls: cameraControlsSchema.optional(),
});

export type DeviceClass = z.infer<typeof deviceClassSchema>;
export type DeviceClassInput = z.input<typeof deviceClassSchema>;
