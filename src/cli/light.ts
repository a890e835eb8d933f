import { readFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import { parseText, withoutFile } from '../document-files/index.js';
import { convertLightAtPixel } from '../physics/radiometry.js';
import { illuminantName } from '../physics/spectra.js';
import { InputError, fractionCurveSchema, illuminantSchema, parseWith } from '../schema/index.js';
import type { FractionCurve, Illuminant } from '../schema/index.js';
import { guard, optionalNumber, parseFlags, printJson, requiredNumber, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

/** The illuminant names this command takes; Ocellus's own names, the standard ones after CIE 15. */
export const LIGHT_ILLUMINANTS = ['cie-a', 'cie-d65', 'led-white', 'led-horticultural', 'nir'] as const;

export const usage = `usage: ocellus light (--illuminance-lux E | --irradiance-w-m2 E) --illuminant NAME
                     [--nir-centre-nm 850 --nir-width-nm 40] --pixel-pitch-um P --exposure-ms T
                     [--qe-curve FILE | --qe Q] [--ir-cut-nm C] [--json]
  Photons and electrons of one pixel for light of a given spectrum on the sensor (spectral integral of
  E(λ)·QE(λ)·λ/(hc), lux turned into watts through the CIE photopic function V(λ)).
  E is the illuminance (lux) or band-integrated irradiance (W/m²) arriving at the sensor; --ir-cut-nm C is an
  ideal filter that passes nothing above C. A near-infrared LED has almost no lux: give it in W/m².
  Illuminants: cie-a (CIE illuminant A, Planck at 2856 K, CIE 15), cie-d65 (CIE D65 table, CIE 15),
  led-white (phosphor white LED, two-Gaussian model), led-horticultural (660/450 nm red/blue grow light, 80 %
  of the power red), nir (Gaussian line, --nir-centre-nm and --nir-width-nm, default 850 and 40 nm FWHM).
  --qe-curve FILE is a JSON or YAML list of {wavelengthNm, value}; without --qe or --qe-curve QE is 1.
  JSON keys: photons, electrons, photons_per_lux_s_um2 (null for light with no visible part), band_nm [lo, hi]
`;

function illuminantOf(name: string, values: Record<string, unknown>): Illuminant {
  if (!(LIGHT_ILLUMINANTS as readonly string[]).includes(name)) {
    throw new UsageError(`--illuminant must be one of ${LIGHT_ILLUMINANTS.join(', ')}, got '${name}'`);
  }
  const spec =
    name === 'nir'
      ? { type: 'nir', centreNm: optionalNumber(values, 'nir-centre-nm', 850), widthNm: optionalNumber(values, 'nir-width-nm', 40) }
      : { type: name };
  if (name !== 'nir' && (values['nir-centre-nm'] !== undefined || values['nir-width-nm'] !== undefined)) {
    throw new UsageError('--nir-centre-nm and --nir-width-nm apply only to --illuminant nir');
  }
  const r = parseWith(illuminantSchema, spec);
  if (!r.ok) throw new UsageError(r.issues.map((i) => `--${i.path === 'centreNm' ? 'nir-centre-nm' : i.path === 'widthNm' ? 'nir-width-nm' : 'illuminant'}: ${i.message}`).join('; '));
  return r.value;
}

async function readQeCurve(file: string, cwd: string): Promise<FractionCurve> {
  const path = resolve(cwd, file);
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (e) {
    throw new InputError(`cannot read the QE curve ${file}`, [{ path: '(root)', message: e instanceof Error ? e.message : String(e) }], file);
  }
  const parsed = parseText(file, text);
  if (!parsed.ok) throw new InputError(`the QE curve ${file} is not readable`, [withoutFile(parsed.issue)], file);
  const r = parseWith(fractionCurveSchema, parsed.data);
  if (!r.ok) throw new InputError(`the QE curve ${file} is not valid`, r.issues, file);
  return r.value;
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      'illuminance-lux': { type: 'string' },
      'irradiance-w-m2': { type: 'string' },
      illuminant: { type: 'string' },
      'nir-centre-nm': { type: 'string' },
      'nir-width-nm': { type: 'string' },
      'pixel-pitch-um': { type: 'string' },
      'exposure-ms': { type: 'string' },
      'qe-curve': { type: 'string' },
      qe: { type: 'string' },
      'ir-cut-nm': { type: 'string' },
      json: { type: 'boolean' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    const hasLux = values['illuminance-lux'] !== undefined;
    const hasWatts = values['irradiance-w-m2'] !== undefined;
    if (hasLux === hasWatts) throw new UsageError('give exactly one of --illuminance-lux or --irradiance-w-m2');
    if (values.illuminant === undefined) throw new UsageError('missing --illuminant');
    const illuminant = illuminantOf(values.illuminant, values);
    if (hasLux && illuminant.type === 'nir') {
      throw new UsageError('a near-infrared LED has almost no lux: give its irradiance with --irradiance-w-m2');
    }
    const amount = requiredNumber(values, hasLux ? 'illuminance-lux' : 'irradiance-w-m2', { positive: false });
    const level = hasLux ? { illuminanceLx: amount } : { irradianceWM2: amount };
    if (amount < 0) throw new UsageError(`--${hasLux ? 'illuminance-lux' : 'irradiance-w-m2'} must be 0 or more, got ${amount}`);
    const pixelPitchUm = requiredNumber(values, 'pixel-pitch-um');
    const exposureMs = requiredNumber(values, 'exposure-ms');
    if (values.qe !== undefined && values['qe-curve'] !== undefined) throw new UsageError('give --qe or --qe-curve, not both');
    const quantumEfficiency = optionalNumber(values, 'qe', 1);
    if (quantumEfficiency > 1) throw new UsageError(`--qe must be a fraction between 0 and 1, got ${quantumEfficiency}`);
    const curve = values['qe-curve'] !== undefined ? await readQeCurve(values['qe-curve'], io.cwd) : undefined;
    const irCutNm = values['ir-cut-nm'] !== undefined ? requiredNumber(values, 'ir-cut-nm') : undefined;
    const path = { quantumEfficiency, quantumEfficiencyCurve: curve, transmission: 1, irCutNm };
    const r = convertLightAtPixel(illuminant, level, pixelPitchUm, exposureMs, path);
    const result = { photons: r.photons, electrons: r.electrons, photons_per_lux_s_um2: r.photonsPerLuxSUm2, band_nm: r.bandNm };
    if (values.json) return printJson(io, result), EXIT_OK;
    io.stdout(
      table([
        ['light', `${illuminantName(illuminant)}${irCutNm !== undefined ? `, IR cut at ${num(irCutNm)} nm` : ''}`],
        ['photons per pixel', num(r.photons)],
        ['electrons', `${num(r.electrons)} e⁻`],
        ['photons per lux·s·µm²', r.photonsPerLuxSUm2 === null ? 'none: this light has no visible part' : num(r.photonsPerLuxSUm2)],
        ['band counted', r.bandNm ? `${r.bandNm[0]}–${r.bandNm[1]} nm (lower edge ${r.bandNm[0]} nm)` : 'none'],
      ]),
    );
    return EXIT_OK;
  });
}
