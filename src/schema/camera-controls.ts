import { z } from 'zod';
import { finite } from './common.js';

/**
 * A calibration table measured on one camera module: pairs of a physical setting (`at`) and the
 * integer code the module's control takes for it. Codes must change strictly one way along `at`
 * (a module whose codes turn back was measured wrongly); values between points are interpolated.
 */
function calibrationTable(at: z.ZodNumber, unitHelp: string) {
  return z
    .array(z.strictObject({ at, code: z.number().int('must be an integer control code') }))
    .min(2, `needs at least two measured points (${unitHelp})`)
    .superRefine((points: CalibrationPoint[], ctx) => {
      const order = points.map((p, i) => ({ ...p, i })).sort((a, b) => a.at - b.at);
      for (let k = 1; k < order.length; k++) {
        const prev = order[k - 1]!;
        const cur = order[k]!;
        if (cur.at === prev.at) {
          ctx.addIssue({ code: 'custom', path: [cur.i, 'at'], message: `repeats ${cur.at}, already measured at point ${prev.i}` });
          return;
        }
      }
      const rising = order[order.length - 1]!.code > order[0]!.code;
      for (let k = 1; k < order.length; k++) {
        const prev = order[k - 1]!;
        const cur = order[k]!;
        if (rising ? cur.code <= prev.code : cur.code >= prev.code) {
          ctx.addIssue({
            code: 'custom',
            path: [cur.i, 'code'],
            message: `code ${cur.code} at ${cur.at} breaks the table's ${rising ? 'rising' : 'falling'} order (point ${prev.i} has code ${prev.code} at ${prev.at}); codes must change strictly one way`,
          });
          return;
        }
      }
    });
}

const atLeastZero = () => finite().refine((v) => v >= 0, { message: 'must be 0 or more' });
const aboveZero = () => finite().refine((v) => v > 0, { message: 'must be greater than 0' });

/**
 * Focus distance to focus code (V4L2 `focus_absolute` has no defined unit). Points are given either in
 * metres (`unit: "m"`) or in dioptres (`unit: "dioptre"`, 0 meaning infinity); interpolation runs in
 * dioptres, where lens extension is close to linear.
 */
export const focusCalibrationSchema = z.discriminatedUnion('unit', [
  z.strictObject({ unit: z.literal('m'), points: calibrationTable(aboveZero(), 'focus distance in metres and its focus code') }),
  z.strictObject({ unit: z.literal('dioptre'), points: calibrationTable(atLeastZero(), 'focus in dioptres and its focus code') }),
]);

/** Analogue gain (×, 1 = unity) to gain code; interpolated linearly in gain. */
export const gainCalibrationSchema = z.strictObject({
  points: calibrationTable(finite().refine((v) => v >= 1, { message: 'must be at least 1 (unity gain)' }), 'gain and its gain code'),
});

/** f-number to iris code, for modules with a motorised iris; interpolated linearly in f-number. */
export const irisCalibrationSchema = z.strictObject({
  points: calibrationTable(aboveZero(), 'f-number and its iris code'),
});

/** How this module's controls map physical settings to codes; measured per module (see device-agent/README.md). */
export const cameraControlsSchema = z.strictObject({
  focus: focusCalibrationSchema.optional(),
  gain: gainCalibrationSchema.optional(),
  iris: irisCalibrationSchema.optional(),
});

export type FocusCalibration = z.infer<typeof focusCalibrationSchema>;
export type CalibrationPoint = { at: number; code: number };
export type CameraControls = z.infer<typeof cameraControlsSchema>;
