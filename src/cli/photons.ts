import { photonsPerPixel, pixelSignal } from '../physics/sensor.js';
import { guard, optionalNumber, parseFlags, printJson, requiredNumber, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

export const usage = `usage: ocellus photons --irradiance-uw-cm2 E --pixel-pitch-um P --exposure-ms T --wavelength-nm W
                      --qe Q --dark-noise-e D --gain-dn-per-e K [--full-well-e F --bit-depth B] [--analog-gain G] [--json]
  Photons, electrons and SNR of one pixel (EMVA 1288 linear model). Without --full-well-e and --bit-depth
  the signal is not clipped.
  JSON keys: photons, electrons, snr, snr_db, saturated
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      'irradiance-uw-cm2': { type: 'string' },
      'pixel-pitch-um': { type: 'string' },
      'exposure-ms': { type: 'string' },
      'wavelength-nm': { type: 'string' },
      qe: { type: 'string' },
      'dark-noise-e': { type: 'string' },
      'gain-dn-per-e': { type: 'string' },
      'full-well-e': { type: 'string' },
      'bit-depth': { type: 'string' },
      'analog-gain': { type: 'string' },
      json: { type: 'boolean' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    const irradianceUwCm2 = requiredNumber(values, 'irradiance-uw-cm2', { positive: false });
    if (irradianceUwCm2 < 0) throw new UsageError(`--irradiance-uw-cm2 must be 0 or more, got ${irradianceUwCm2}`);
    const pixelPitchUm = requiredNumber(values, 'pixel-pitch-um');
    const exposureMs = requiredNumber(values, 'exposure-ms');
    const wavelengthNm = requiredNumber(values, 'wavelength-nm');
    const quantumEfficiency = requiredNumber(values, 'qe');
    if (quantumEfficiency > 1) throw new UsageError(`--qe must be a fraction between 0 and 1, got ${quantumEfficiency}`);
    const darkNoiseE = requiredNumber(values, 'dark-noise-e', { positive: false });
    if (darkNoiseE < 0) throw new UsageError(`--dark-noise-e must be 0 or more, got ${darkNoiseE}`);
    const gainDnPerE = requiredNumber(values, 'gain-dn-per-e');
    const fullWellE = optionalNumber(values, 'full-well-e', Infinity);
    const bitDepth = optionalNumber(values, 'bit-depth', Infinity, { integer: true });
    const analogGain = optionalNumber(values, 'analog-gain', 1);
    const photons = photonsPerPixel(irradianceUwCm2, pixelPitchUm, exposureMs, wavelengthNm);
    const signal = pixelSignal({ photons, quantumEfficiency, darkNoiseE, gainDnPerE, fullWellE, bitDepth, analogGain });
    const result = { photons, electrons: signal.electrons, snr: signal.snr, snr_db: signal.snrDb, saturated: signal.saturated };
    if (values.json) return printJson(io, result), EXIT_OK;
    io.stdout(
      table([
        ['photons per pixel', num(photons)],
        ['electrons', `${num(signal.electrons)} e⁻${signal.saturated ? ' (saturated)' : ''}`],
        ['SNR', `${num(signal.snr)} (${num(signal.snrDb)} dB)`],
      ]),
    );
    return EXIT_OK;
  });
}
