import { airyDiameterUm, blurCircleMm, depthOfFieldMm, hyperfocalDistanceMm, mtfCutoffCyclesPerMm } from '../physics/optics.js';
import { mToMm, mmToM } from '../physics/units.js';
import { guard, parseFlags, optionalNumber, printJson, requiredNumber, toNumber, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

export const usage = `usage: ocellus optics --focal-length-mm F --f-number N --focus-m S --coc-mm C [--at-m D]... [--wavelength-nm 550] [--json]
  Thin-lens depth of field, diffraction and blur circles.
  --at-m D          distance (m) to report the defocus blur-circle diameter at; repeat for more
  --wavelength-nm   wavelength for the Airy disk and MTF cutoff (default 550)
  JSON keys: hyperfocal_m, near_m, far_m (null when infinite), airy_diameter_um, mtf_cutoff_cyc_per_mm, at[{distance_m, blur_circle_mm}]
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      'focal-length-mm': { type: 'string' },
      'f-number': { type: 'string' },
      'focus-m': { type: 'string' },
      'coc-mm': { type: 'string' },
      'at-m': { type: 'string', multiple: true },
      'wavelength-nm': { type: 'string' },
      json: { type: 'boolean' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    const focalLengthMm = requiredNumber(values, 'focal-length-mm');
    const fNumber = requiredNumber(values, 'f-number');
    const focusM = requiredNumber(values, 'focus-m');
    const cocMm = requiredNumber(values, 'coc-mm');
    const wavelengthNm = optionalNumber(values, 'wavelength-nm', 550);
    const atM = (values['at-m'] ?? []).map((raw) => toNumber('at-m', raw));
    const focusMm = mToMm(focusM);
    if (!(focusMm > focalLengthMm)) {
      throw new UsageError(`--focus-m ${focusM} m must be beyond the focal length (${focalLengthMm} mm): the lens forms no real image nearer`);
    }
    const dof = depthOfFieldMm(focalLengthMm, fNumber, cocMm, focusMm);
    const result = {
      hyperfocal_m: mmToM(hyperfocalDistanceMm(focalLengthMm, fNumber, cocMm)),
      near_m: mmToM(dof.nearMm),
      far_m: Number.isFinite(dof.farMm) ? mmToM(dof.farMm) : null,
      airy_diameter_um: airyDiameterUm(wavelengthNm, fNumber),
      mtf_cutoff_cyc_per_mm: mtfCutoffCyclesPerMm(wavelengthNm, fNumber),
      at: atM.map((d) => ({ distance_m: d, blur_circle_mm: blurCircleMm(focalLengthMm, fNumber, focusMm, mToMm(d)) })),
    };
    if (values.json) return printJson(io, result), EXIT_OK;
    io.stdout(
      table([
        ['hyperfocal distance', `${num(result.hyperfocal_m)} m`],
        ['depth of field', `${num(result.near_m)} m to ${result.far_m === null ? 'infinity' : `${num(result.far_m)} m`}`],
        [`Airy disk diameter (${num(wavelengthNm)} nm)`, `${num(result.airy_diameter_um)} µm`],
        ['MTF cutoff', `${num(result.mtf_cutoff_cyc_per_mm)} cycles/mm`],
        ...result.at.map((a): [string, string] => [`blur circle at ${num(a.distance_m)} m`, `${num(a.blur_circle_mm)} mm`]),
      ]),
    );
    return EXIT_OK;
  });
}
