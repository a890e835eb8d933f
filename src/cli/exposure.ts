import { ev100, exposureValue, focalPlaneExposureLxS, meterExposureS } from '../physics/exposure.js';
import { guard, parseFlags, printJson, requiredNumber } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

export const usage = `usage: ocellus exposure --luminance-cd-m2 L --f-number N --exposure-s T --iso S [--json]
  Exposure value, EV at ISO 100, focal-plane exposure (ISO 12232, q ≈ 0.65) and the exposure a
  reflected-light meter would choose (K = 12.5 cd/m², ISO 2720).
  JSON keys: ev, ev100, focal_plane_exposure_lx_s, metered_exposure_s
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      'luminance-cd-m2': { type: 'string' },
      'f-number': { type: 'string' },
      'exposure-s': { type: 'string' },
      iso: { type: 'string' },
      json: { type: 'boolean' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    const luminanceCdM2 = requiredNumber(values, 'luminance-cd-m2');
    const fNumber = requiredNumber(values, 'f-number');
    const exposureS = requiredNumber(values, 'exposure-s');
    const iso = requiredNumber(values, 'iso');
    const result = {
      ev: exposureValue(fNumber, exposureS),
      ev100: ev100(fNumber, exposureS, iso),
      focal_plane_exposure_lx_s: focalPlaneExposureLxS(luminanceCdM2, fNumber, exposureS),
      metered_exposure_s: meterExposureS(luminanceCdM2, fNumber, iso),
    };
    if (values.json) return printJson(io, result), EXIT_OK;
    io.stdout(
      table([
        ['exposure value', `EV ${num(result.ev)}`],
        ['at ISO 100', `EV100 ${num(result.ev100)}`],
        ['focal-plane exposure', `${num(result.focal_plane_exposure_lx_s)} lx·s`],
        ['meter would choose', `${num(result.metered_exposure_s)} s at f/${num(fNumber)}, ISO ${num(iso)}`],
      ]),
    );
    return EXIT_OK;
  });
}
