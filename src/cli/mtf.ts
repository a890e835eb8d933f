import {
  chainBlurDiameterUm,
  diffractionCutoffCycPerMm,
  mtf50CycPerMm,
  mtfParts,
  nyquistCycPerMm,
  pixelApertureUm,
  workingFNumber,
} from '../physics/mtf.js';
import { guard, optionalNumber, parseFlags, printJson, requiredNumber, toNumber, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

export const usage = `usage: ocellus mtf --f-number N --wavelength-nm W --pixel-pitch-um P [--fill-factor F] [--defocus-blur-um B]
                  [--motion-px M] [--magnification M] [--at-cyc-per-mm F]... [--json]
  The image chain's modulation transfer function: diffraction of a circular aperture at the working f-number
  N·(1 + m), the defocus disc (Stokseth's form), the square pixel aperture and linear motion, multiplied.
  --fill-factor F      share of the pixel that collects light, 0 < F ≤ 1 (default 1)
  --defocus-blur-um B  diameter of the geometric defocus disc on the sensor (default 0)
  --motion-px M        length of the image's smear during the exposure, sensor pixels (default 0)
  --magnification M    magnification at the focus distance, for the working f-number (default 0, focus at infinity)
  --at-cyc-per-mm F    frequency on the sensor to report every stage at; repeat for more
                       (default half the sensor's Nyquist frequency and the Nyquist frequency)
  JSON keys: cutoff_cyc_per_mm, mtf50_cyc_per_mm, equivalent_blur_px, working_f_number, nyquist_cyc_per_mm,
             at[{cyc_per_mm, diffraction, defocus, pixel, motion, system}]
  Aberrations and field curvature are not modelled: the figures are for an ideal lens on the axis.
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      'f-number': { type: 'string' },
      'wavelength-nm': { type: 'string' },
      'pixel-pitch-um': { type: 'string' },
      'fill-factor': { type: 'string' },
      'defocus-blur-um': { type: 'string' },
      'motion-px': { type: 'string' },
      magnification: { type: 'string' },
      'at-cyc-per-mm': { type: 'string', multiple: true },
      json: { type: 'boolean' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    const fNumber = requiredNumber(values, 'f-number');
    const wavelengthNm = requiredNumber(values, 'wavelength-nm');
    const pixelPitchUm = requiredNumber(values, 'pixel-pitch-um');
    const fillFactor = optionalNumber(values, 'fill-factor', 1);
    if (fillFactor > 1) throw new UsageError(`--fill-factor must be at most 1, got ${fillFactor}`);
    const defocusBlurUm = optionalNumber(values, 'defocus-blur-um', 0, { positive: false });
    const motionPx = optionalNumber(values, 'motion-px', 0, { positive: false });
    const magnification = optionalNumber(values, 'magnification', 0, { positive: false });
    for (const [flag, v] of [['defocus-blur-um', defocusBlurUm], ['motion-px', motionPx], ['magnification', magnification]] as const) {
      if (v < 0) throw new UsageError(`--${flag} must be 0 or more, got ${v}`);
    }
    const nyquist = nyquistCycPerMm(pixelPitchUm);
    const given = (values['at-cyc-per-mm'] ?? []).map((raw) => toNumber('at-cyc-per-mm', raw, { positive: false }));
    if (given.some((v) => v < 0)) throw new UsageError('--at-cyc-per-mm must be 0 or more');
    const at = given.length > 0 ? given : [nyquist / 2, nyquist];

    const workingF = workingFNumber(fNumber, magnification);
    const chain = {
      cutoffCycPerMm: diffractionCutoffCycPerMm(wavelengthNm, workingF),
      defocusBlurUm,
      pixelApertureUm: pixelApertureUm(pixelPitchUm, fillFactor),
      motionUm: motionPx * pixelPitchUm,
    };
    const result = {
      cutoff_cyc_per_mm: chain.cutoffCycPerMm,
      mtf50_cyc_per_mm: mtf50CycPerMm(chain),
      equivalent_blur_px: chainBlurDiameterUm(chain) / pixelPitchUm,
      working_f_number: workingF,
      nyquist_cyc_per_mm: nyquist,
      at: at.map((cycPerMm) => ({ cyc_per_mm: cycPerMm, ...mtfParts(cycPerMm, chain) })),
    };
    if (values.json) return printJson(io, result), EXIT_OK;
    io.stdout(
      table([
        ['working f-number', num(result.working_f_number)],
        ['diffraction cutoff', `${num(result.cutoff_cyc_per_mm)} cycles/mm`],
        ['MTF50', `${num(result.mtf50_cyc_per_mm)} cycles/mm`],
        ['equivalent blur disc', `${num(result.equivalent_blur_px)} px`],
        ['sensor Nyquist', `${num(nyquist)} cycles/mm`],
      ]) +
        '\n' +
        columns([
          ['cycles/mm', 'diffraction', 'defocus', 'pixel', 'motion', 'system'],
          ...result.at.map((a) => [num(a.cyc_per_mm), num(a.diffraction), num(a.defocus), num(a.pixel), num(a.motion), num(a.system)]),
        ]),
    );
    return EXIT_OK;
  });
}

/** Rows of cells, each column padded to its widest cell. */
function columns(rows: string[][]): string {
  const widths = rows[0]!.map((_, i) => Math.max(...rows.map((r) => r[i]!.length)));
  return rows.map((r) => r.map((cell, i) => cell.padStart(widths[i]!)).join('  ')).join('\n') + '\n';
}
