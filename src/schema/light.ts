/**
 * Light as a spectrum: the illuminants a scene or a robot's own light can have, and curves of a quantity
 * against wavelength (sensor quantum efficiency, lens transmission, a measured spectral power).
 * Illuminant names are Ocellus's own; the standard ones point at CIE 15 (illuminant A and D65).
 */
import { z } from 'zod';
import { finite, fraction, positive } from './common.js';

/** Wavelengths the radiometry integrates over: 300–1100 nm covers D65's table and silicon's response. */
export const SPECTRUM_MIN_NM = 300;
export const SPECTRUM_MAX_NM = 1100;

const wavelengthNm = () =>
  positive().refine((v) => v >= SPECTRUM_MIN_NM && v <= SPECTRUM_MAX_NM, {
    message: `must lie between ${SPECTRUM_MIN_NM} and ${SPECTRUM_MAX_NM} nm`,
  });

/** Points in strictly increasing wavelength; the message names the first point out of order. */
function sortedByWavelength<T extends { wavelengthNm: number }>(points: T[], ctx: z.RefinementCtx): void {
  for (let i = 1; i < points.length; i++) {
    if (!(points[i]!.wavelengthNm > points[i - 1]!.wavelengthNm)) {
      ctx.addIssue({
        code: 'custom',
        path: [i, 'wavelengthNm'],
        message: `wavelengths must be strictly increasing: ${points[i]!.wavelengthNm} nm follows ${points[i - 1]!.wavelengthNm} nm`,
      });
      return;
    }
  }
}

/** A curve of a fraction (QE, transmission) against wavelength; linear between points, 0 outside them. */
export const fractionCurveSchema = z
  .array(z.strictObject({ wavelengthNm: wavelengthNm(), value: fraction() }))
  .min(2)
  .superRefine(sortedByWavelength);
export type FractionCurve = z.infer<typeof fractionCurveSchema>;

/** A relative spectral power distribution, any scale; linear between points, 0 outside them. */
export const spectralPowerSchema = z
  .array(z.strictObject({ wavelengthNm: wavelengthNm(), power: finite().refine((v) => v >= 0, { message: 'must be 0 or more' }) }))
  .min(2)
  .superRefine(sortedByWavelength)
  .refine((pts) => pts.some((p) => p.power > 0), { message: 'must have some power at some wavelength' });

export const illuminantSchema = z.discriminatedUnion('type', [
  /** CIE standard illuminant A: a Planckian radiator at 2856 K (CIE 15). */
  z.strictObject({ type: z.literal('cie-a') }),
  /** CIE standard illuminant D65, average daylight, from its table (CIE 15). */
  z.strictObject({ type: z.literal('cie-d65') }),
  /** A phosphor-converted white LED: a blue die line plus a broad phosphor band (two-Gaussian model). */
  z.strictObject({ type: z.literal('led-white') }),
  /** A red/blue grow light: two LED lines; `redShare` is the red line's share of the radiant power. */
  z.strictObject({
    type: z.literal('led-horticultural'),
    redNm: wavelengthNm().default(660),
    blueNm: wavelengthNm().default(450),
    redShare: fraction().default(0.8),
    widthNm: positive().default(20),
  }),
  /** A narrow-band near-infrared LED: centre and full width at half maximum, both required. */
  z.strictObject({ type: z.literal('nir'), centreNm: wavelengthNm(), widthNm: positive() }),
  /** All power at one wavelength (the single-wavelength approximation, kept for comparison). */
  z.strictObject({ type: z.literal('monochromatic'), wavelengthNm: wavelengthNm() }),
  /** A measured relative spectral power distribution. */
  z.strictObject({ type: z.literal('spectral'), points: spectralPowerSchema }),
]);
export type Illuminant = z.infer<typeof illuminantSchema>;
export type IlluminantType = Illuminant['type'];
export const ILLUMINANT_TYPES: IlluminantType[] = ['cie-a', 'cie-d65', 'led-white', 'led-horticultural', 'nir', 'monochromatic', 'spectral'];

/**
 * A light carried by the robot, switched with the exposure. Its strength is a radiant intensity (W/sr) or,
 * equivalently for a source small against the distance, the irradiance it gives at 1 m (W/m²).
 */
export const robotLightSchema = z
  .strictObject({
    id: z.string().regex(/^[a-z0-9][a-z0-9._-]{0,63}$/, 'must be a lower-case slug'),
    illuminant: illuminantSchema,
    radiantIntensityWPerSr: positive().optional(),
    irradianceAt1mWM2: positive().optional(),
    /** Electrical power drawn while the light is on. */
    electricalPowerW: positive(),
    /** On only while the sensor exposes (a strobe); otherwise on for the whole frame period. */
    syncedToExposure: z.boolean().default(true),
    /** Draw of the driver while the light is off. */
    idlePowerMw: finite().refine((v) => v >= 0, { message: 'must be 0 or more' }).default(0),
  })
  .superRefine((l, ctx) => {
    const given = (l.radiantIntensityWPerSr !== undefined ? 1 : 0) + (l.irradianceAt1mWM2 !== undefined ? 1 : 0);
    if (given !== 1) {
      ctx.addIssue({ code: 'custom', path: ['radiantIntensityWPerSr'], message: 'give exactly one of radiantIntensityWPerSr or irradianceAt1mWM2' });
    }
  });
export type RobotLight = z.infer<typeof robotLightSchema>;

/**
 * What lights the task's scene: the ambient illuminant (the task's luminances are of this light), the robot
 * light used, the reflectance range the robot light meets, and the operating temperature.
 */
export const sceneSchema = z
  .strictObject({
  illuminant: illuminantSchema,
  /** Id of a light in the device class's `lights`, switched on for this task. */
  robotLight: z.string().optional(),
  /** Lambertian reflectance of the darkest and brightest targets under the robot light (project defaults). */
  reflectanceMin: fraction().default(0.1),
  reflectanceMax: fraction().default(0.9),
  /** Sensor temperature while the task runs; overrides the device class's operating temperature. */
  temperatureC: finite().optional(),
  })
  .refine((s) => s.reflectanceMax >= s.reflectanceMin, { message: 'reflectanceMax must be at least reflectanceMin', path: ['reflectanceMax'] });
export type Scene = z.infer<typeof sceneSchema>;
