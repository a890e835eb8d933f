import { pixelSignal, saturationElectrons, scenePhotonsPerPixel } from '../physics/sensor.js';
import { sToUs } from '../physics/units.js';
import type { Check } from '../schema/index.js';
import { againstMax, againstMin, fmt, makeCheck } from './check.js';
import type { ValidationInput } from './input.js';

/** Share of the saturation capacity above which the brightest scene is flagged as near clipping. */
export const NEAR_CLIPPING_FRACTION = 0.9;

function photonsAt(input: ValidationInput, luminanceCdM2: number): number {
  const { sensor } = input.deviceClass;
  const { fNumber, exposureUs } = input.profile.camera;
  return scenePhotonsPerPixel({ luminanceCdM2, fNumber, exposureUs, pixelPitchUm: sensor.pixelPitchUm, wavelengthNm: sensor.designWavelengthNm });
}

function settings(input: ValidationInput): string {
  const c = input.profile.camera;
  return `f/${c.fNumber}, ${fmt(c.exposureUs)} µs, gain ${fmt(c.analogGain)}×`;
}

/** SNR at the darkest scene (ISO 12232 q → irradiance at the design wavelength → EMVA 1288 electrons and noise). */
export function snrDarkCheck(input: ValidationInput): { check: Check; snrDb: number | null } {
  const { task, deviceClass, profile } = input;
  const { sensor } = deviceClass;
  let photons: number;
  try {
    photons = photonsAt(input, task.luminanceMinCdM2);
  } catch (e) {
    const reason = e instanceof Error ? e.message : String(e);
    return { check: makeCheck('snr-dark', 'fail', null, task.minSnrDb, 'dB', 'deviceClassId', `SNR cannot be estimated: ${reason}`), snrDb: null };
  }
  const signal = pixelSignal({
    photons,
    quantumEfficiency: sensor.quantumEfficiency,
    darkNoiseE: sensor.darkNoiseE,
    gainDnPerE: sensor.gainDnPerE,
    fullWellE: sensor.fullWellE,
    bitDepth: sensor.bitDepth,
    analogGain: profile.camera.analogGain,
  });
  const v = againstMin(signal.snrDb, task.minSnrDb, 'dB', 'the task minimum of {}');
  const message = `SNR ${fmt(signal.snrDb)} dB at the darkest scene ${fmt(task.luminanceMinCdM2)} cd/m² (${fmt(signal.electrons)} e⁻ per pixel at ${settings(input)}) ${v.text}`;
  return { check: makeCheck('snr-dark', v.ok ? 'pass' : 'fail', signal.snrDb, task.minSnrDb, 'dB', 'camera.exposureUs', message), snrDb: signal.snrDb };
}

/** The brightest scene must stay below saturation: warn above NEAR_CLIPPING_FRACTION, fail when saturated. */
export function clippingBrightCheck(input: ValidationInput): Check {
  const { task, deviceClass, profile } = input;
  const { sensor } = deviceClass;
  let photons: number;
  try {
    photons = photonsAt(input, task.luminanceMaxCdM2);
  } catch (e) {
    const reason = e instanceof Error ? e.message : String(e);
    return makeCheck('clipping-bright', 'fail', null, 100, '%', 'deviceClassId', `signal cannot be estimated: ${reason}`);
  }
  const electrons = sensor.quantumEfficiency * photons;
  const saturationE = saturationElectrons(sensor.fullWellE, sensor.bitDepth, sensor.gainDnPerE, profile.camera.analogGain);
  const percent = (100 * electrons) / saturationE;
  const adcLimited = saturationE < sensor.fullWellE;
  const status = percent >= 100 ? 'fail' : percent > 100 * NEAR_CLIPPING_FRACTION ? 'warn' : 'pass';
  const limitedBy = adcLimited ? `the ADC range at gain ${fmt(profile.camera.analogGain)}×` : 'the full well';
  const verdict =
    status === 'fail'
      ? `saturates: the signal would reach ${fmt(percent)}% of saturation, over it by ${fmt(percent - 100)} points`
      : status === 'warn'
        ? `is near clipping at ${fmt(percent)}% of saturation (above the ${fmt(100 * NEAR_CLIPPING_FRACTION)}% caution line by ${fmt(percent - 100 * NEAR_CLIPPING_FRACTION)} points)`
        : `stays at ${fmt(percent)}% of saturation, ${fmt(100 - percent)} points below it`;
  const message = `at the brightest scene ${fmt(task.luminanceMaxCdM2)} cd/m² a pixel collects ${fmt(electrons)} e⁻ (${settings(input)}) and ${verdict}; saturation is ${fmt(saturationE)} e⁻, set by ${limitedBy}`;
  const path = adcLimited && profile.camera.analogGain > 1 && status !== 'pass' ? 'camera.analogGain' : 'camera.exposureUs';
  return makeCheck('clipping-bright', status, percent, 100, '%', path, message);
}

export function exposureFitsFrameCheck(input: ValidationInput): Check {
  const { task, profile } = input;
  const periodUs = sToUs(1 / task.frameRateHz);
  const v = againstMax(profile.camera.exposureUs, periodUs, 'µs', `the {} frame period at ${fmt(task.frameRateHz)} Hz`);
  const message = `exposure ${fmt(profile.camera.exposureUs)} µs ${v.text}`;
  return makeCheck('exposure-fits-frame', v.ok ? 'pass' : 'fail', profile.camera.exposureUs, periodUs, 'us', 'camera.exposureUs', message);
}
