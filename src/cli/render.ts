import { rename, writeFile } from 'node:fs/promises';
import { basename, dirname, extname, join, relative, resolve } from 'node:path';
import { loadCatalog, mergeCatalogs, profilesOf, resolveProfile } from '../document-files/index.js';
import { profilePsf } from '../render/psf.js';
import { renderSeen } from '../render/render-image.js';
import { InputError } from '../schema/index.js';
import { guard, optionalNumber, parseFlags, printJson, requiredNumber, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

export const usage = `usage: ocellus render --profile PROFILE.json --image IMG --distance-m D [--luminance-cd-m2 L] [--catalog DIR ...] [--seed N] [--out PNG] [--json]
  What the robot's network would see: the sample image resized to the model's input, blurred by the profile's
  point-spread function at distance D (the validator's image chain: diffraction at the working f-number, defocus,
  pixel aperture and motion, as one transfer function) and given the sensor's noise at the scene luminance (default the
  task's darkest). Documents the profile names are found under --catalog (default: the folder above the profile's).
  Writes a PNG (default IMG-seen.png beside the image). A preview only: check any change on one robot, in a safe
  state, before a fleet runs it.
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      profile: { type: 'string' },
      image: { type: 'string' },
      'distance-m': { type: 'string' },
      'luminance-cd-m2': { type: 'string' },
      catalog: { type: 'string', multiple: true },
      seed: { type: 'string' },
      out: { type: 'string' },
      json: { type: 'boolean' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (values.profile === undefined) throw new UsageError('missing --profile');
    if (values.image === undefined) throw new UsageError('missing --image');
    const distanceM = requiredNumber(values, 'distance-m');
    const profilePath = resolve(io.cwd, values.profile);
    const catalogs = values.catalog ?? [dirname(dirname(profilePath))];
    const given = await loadCatalog([profilePath], { cwd: io.cwd });
    const catalog = mergeCatalogs(given, await loadCatalog(catalogs, { cwd: io.cwd }));
    const found = profilesOf(given)[0];
    if (!found) {
      const issues = given.issues.map((i) => ({ path: i.path, message: i.message }));
      throw new InputError(`${values.profile} holds no usable task profile`, issues.length ? issues : [{ path: '(root)', message: 'not a task profile' }], values.profile);
    }
    const resolved = resolveProfile(catalog, found.profile, found.file);
    if (!resolved.ok) throw new InputError(`profile ${found.profile.id} cannot be resolved`, resolved.issues.map((i) => ({ path: i.path, message: i.message })), found.file);
    const input = resolved.value;
    const luminance = optionalNumber(values, 'luminance-cd-m2', input.task.luminanceMinCdM2);
    const psf = profilePsf(input, distanceM, luminance);
    const imagePath = resolve(io.cwd, values.image);
    const shownImage = relative(io.cwd, imagePath) || imagePath;
    const channels = input.network.input.channels === 1 ? 1 : 3;
    const png = await renderSeen(imagePath, shownImage, { channels, widthPx: input.model.inputWidthPx, heightPx: input.model.inputHeightPx }, psf, values.seed === undefined ? 1 : Number(values.seed));
    const out = values.out === undefined ? join(dirname(imagePath), `${basename(imagePath, extname(imagePath))}-seen.png`) : resolve(io.cwd, values.out);
    const temporary = `${out}.${process.pid}.partial`;
    await writeFile(temporary, png);
    await rename(temporary, out);
    const shownOut = relative(io.cwd, out) || out;
    const figures = {
      profile: input.profile.id,
      distance_m: distanceM,
      input_px: [input.model.inputWidthPx, input.model.inputHeightPx],
      downscale: psf.downscale,
      blur_spot_sensor_px: psf.blurSpotSensorPx,
      blur_spot_input_px: psf.blurSpotInputPx,
      motion_input_px: psf.motionInputPx,
      luminance_cd_m2: psf.luminanceCdM2,
      snr_input_db: psf.snrInputDb,
      psf_size_px: psf.kernel.size,
      out: shownOut,
    };
    if (values.json) return printJson(io, figures), EXIT_OK;
    io.stdout(
      table([
        ['profile', `${input.profile.id} at ${num(distanceM)} m`],
        ['network input', `${input.model.inputWidthPx}×${input.model.inputHeightPx} px (sensor ÷ ${num(psf.downscale)})`],
        ['blur spot', `${num(psf.blurSpotSensorPx)} sensor px = ${num(psf.blurSpotInputPx)} input px (equivalent disc of the whole chain, same MTF50)`],
        ['motion', `${num(psf.motionInputPx)} input px along x`],
        ['noise', `SNR ${num(psf.snrInputDb)} dB per input pixel at ${num(psf.luminanceCdM2)} cd/m²`],
        ['written', shownOut],
      ]),
    );
    io.stdout('A preview, not a safety check: obstacles the network misses here may be missed on the robot. Test changes on one unit first.\n');
    return EXIT_OK;
  });
}
