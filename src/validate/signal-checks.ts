import { brightPixel, darkPixel, sceneLight } from '../physics/scene-signal.js';
import type { SceneLight } from '../physics/scene-signal.js';
import { sToUs } from '../physics/units.js';
import type { Check } from '../schema/index.js';
import { againstMax, againstMin, fmt, makeCheck } from './check.js';
import type { ValidationInput } from './input.js';
import { cachedSceneLight } from './light-cache.js';

/** Share of the saturation capacity above which the brightest scene is flagged as near clipping. */
export const NEAR_CLIPPING_FRACTION = 0.9;

function settings(input: ValidationInput): string {
  const c = input.profile.camera;
  return `f/${c.fNumber}, ${fmt(c.exposureUs)} µs, gain ${fmt(c.analogGain)}×`;
}

/** How the light was described, for messages: the illuminant, the robot light, and the monochromatic stand-in. */
function lightText(light: SceneLight): string {
  const robot = light.light ? ` plus the robot light "${light.light.spec.id}" (${light.light.name})` : '';
  const assumed = light.assumedMonochromatic ? ' (the task describes no scene light, so one design wavelength is assumed)' : '';
  return `under ${light.ambientName}${robot}${assumed}`;
}

function resolveLight(input: ValidationInput): { ok: true; light: SceneLight } | { ok: false; reason: string; path: string } {
  const r = cachedSceneLight(input.task, input.deviceClass, () => sceneLight(input.task, input.deviceClass));
  return r.ok ? { ok: true, light: r.value } : r;
}

/**
 * SNR of the darkest pixel (the image corner, cos⁴ fall-off) at the darkest scene: spectral radiometry → EMVA 1288
 * electrons with read noise at the gain, dark current at the temperature and quantisation of the bits the network gets.
 */
export function snrDarkCheck(input: ValidationInput): { check: Check; snrDb: number | null } {
  const { task, deviceClass, profile } = input;
  const resolved = resolveLight(input);
  if (!resolved.ok) return { check: makeCheck('snr-dark', 'fail', null, task.minSnrDb, 'dB', resolved.path, `SNR cannot be estimated: ${resolved.reason}`), snrDb: null };
  const light = resolved.light;
  let dark;
  try {
    dark = darkPixel(light, deviceClass, task, profile.camera);
  } catch (e) {
    const reason = e instanceof Error ? e.message : String(e);
    return { check: makeCheck('snr-dark', 'fail', null, task.minSnrDb, 'dB', 'deviceClassId', `SNR cannot be estimated: ${reason}`), snrDb: null };
  }
  const v = againstMin(dark.snrDb, task.minSnrDb, 'dB', 'the task minimum of {}');
  const n = dark.noise;
  const noise = `read noise ${fmt(n.readNoiseE)} e⁻ at gain ${fmt(profile.camera.analogGain)}×, dark ${fmt(n.darkElectrons)} e⁻ at ${fmt(light.temperatureC)} °C, quantisation ${fmt(Math.sqrt(n.quantisationVarE2))} e⁻ rms`;
  const message = `SNR ${fmt(dark.snrDb)} dB at the image corner (cos⁴ fall-off) of the darkest scene ${fmt(task.luminanceMinCdM2)} cd/m² ${lightText(light)}: ${fmt(dark.electrons)} e⁻ per pixel at ${settings(input)} (working f/${fmt(dark.workingFNumber)}); ${noise}; ${v.text}`;
  // Where quantisation dominates the noise, more gain is the remedy; otherwise more light.
  const quantDominates = n.quantisationVarE2 > n.readNoiseE * n.readNoiseE + n.darkElectrons + dark.electrons;
  const path = !v.ok && quantDominates ? 'camera.analogGain' : 'camera.exposureUs';
  return { check: makeCheck('snr-dark', v.ok ? 'pass' : 'fail', dark.snrDb, task.minSnrDb, 'dB', path, message), snrDb: dark.snrDb };
}

/** The brightest pixel (image centre) must stay below saturation: warn above NEAR_CLIPPING_FRACTION, fail when saturated. */
export function clippingBrightCheck(input: ValidationInput): Check {
  const { task, deviceClass, profile } = input;
  const resolved = resolveLight(input);
  if (!resolved.ok) return makeCheck('clipping-bright', 'fail', null, 100, '%', resolved.path, `signal cannot be estimated: ${resolved.reason}`);
  const light = resolved.light;
  let bright;
  try {
    bright = brightPixel(light, deviceClass, task, profile.camera);
  } catch (e) {
    const reason = e instanceof Error ? e.message : String(e);
    return makeCheck('clipping-bright', 'fail', null, 100, '%', 'deviceClassId', `signal cannot be estimated: ${reason}`);
  }
  const percent = bright.percentOfSaturation;
  const status = percent >= 100 ? 'fail' : percent > 100 * NEAR_CLIPPING_FRACTION ? 'warn' : 'pass';
  const limitedBy = bright.adcLimited ? `the ADC range at gain ${fmt(profile.camera.analogGain)}×` : 'the full well';
  const verdict =
    status === 'fail'
      ? `saturates: the signal would reach ${fmt(percent)}% of saturation, over it by ${fmt(percent - 100)} points`
      : status === 'warn'
        ? `is near clipping at ${fmt(percent)}% of saturation (above the ${fmt(100 * NEAR_CLIPPING_FRACTION)}% caution line by ${fmt(percent - 100 * NEAR_CLIPPING_FRACTION)} points)`
        : `stays at ${fmt(percent)}% of saturation, ${fmt(100 - percent)} points below it`;
  const message = `at the image centre of the brightest scene ${fmt(task.luminanceMaxCdM2)} cd/m² ${lightText(light)} a pixel collects ${fmt(bright.electrons)} e⁻ (${settings(input)}) and ${verdict}; saturation is ${fmt(bright.saturationE)} e⁻, set by ${limitedBy}`;
  const path = bright.adcLimited && profile.camera.analogGain > 1 && status !== 'pass' ? 'camera.analogGain' : 'camera.exposureUs';
  return makeCheck('clipping-bright', status, percent, 100, '%', path, message);
}

export function exposureFitsFrameCheck(input: ValidationInput): Check {
  const { task, profile } = input;
  const periodUs = sToUs(1 / task.frameRateHz);
  const v = againstMax(profile.camera.exposureUs, periodUs, 'µs', `the {} frame period at ${fmt(task.frameRateHz)} Hz`);
  const message = `exposure ${fmt(profile.camera.exposureUs)} µs ${v.text}`;
  return makeCheck('exposure-fits-frame', v.ok ? 'pass' : 'fail', profile.camera.exposureUs, periodUs, 'us', 'camera.exposureUs', message);
}
