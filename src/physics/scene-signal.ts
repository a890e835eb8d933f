/**
 * Electrons, saturation and SNR of the darkest and the brightest pixel of a task's scene, through the full
 * chain: ambient light of a given luminance and spectrum, plus the robot's own light (inverse-square to the
 * target, Lambertian reflection), sensor-plane irradiance E = (π/4)·v·cos⁴θ·L/N_w² (ISO 12232; cos⁴ law),
 * spectral integral through lens transmission and QE (radiometry.ts), and EMVA 1288 noise (sensor-noise.ts).
 * The darkest pixel is the image corner at the task's lowest luminance and darkest reflectance at the far
 * end; the brightest is the centre at the highest luminance and brightest reflectance at the near end.
 */
import type { DeviceClass } from '../schema/device-class.js';
import type { Illuminant, RobotLight } from '../schema/light.js';
import type { Task } from '../schema/task.js';
import { magnificationAtFocus, workingFNumber } from './mtf.js';
import {
  countFromIlluminance,
  countFromIrradiance,
  cornerFieldAngleRad,
  inverseSquareIrradianceWM2,
  lambertianRadianceWM2Sr,
  sensorPlaneFromScene,
  spectralFactors,
} from './radiometry.js';
import type { SpectralFactors, SpectralPath } from './radiometry.js';
import { darkCurrentAtEPerS, quantisationVarianceE2, readNoiseAtGainE, snrDbWithNoise } from './sensor-noise.js';
import type { NoiseTerms } from './sensor-noise.js';
import { saturationElectrons, systemGainDnPerE } from './sensor.js';
import { illuminantName } from './spectra.js';
import { mToMm, umToMm, usToMs, usToS } from './units.js';

type Sensor = DeviceClass['sensor'];
type Lens = DeviceClass['lens'];

/** The optical path of a device class: its lens transmission (and IR cut) and its sensor's QE. */
export function spectralPathOf(deviceClass: Pick<DeviceClass, 'lens' | 'sensor'>): SpectralPath {
  const { lens, sensor } = deviceClass;
  return {
    quantumEfficiency: sensor.quantumEfficiency,
    quantumEfficiencyCurve: sensor.quantumEfficiencyCurve,
    transmission: lens.transmission,
    transmissionCurve: lens.transmissionCurve,
    irCutNm: lens.irCutNm,
  };
}

/** Everything about the light that does not change with the camera settings: computed once per device class and task. */
export interface SceneLight {
  ambient: Illuminant;
  ambientName: string;
  ambientFactors: SpectralFactors;
  /** The robot light switched on for the task, or null. */
  light: { spec: RobotLight; name: string; factors: SpectralFactors; irradianceAt1mWM2: number } | null;
  /** Whether the ambient light is a stand-in for a missing scene description (one design wavelength). */
  assumedMonochromatic: boolean;
  temperatureC: number;
  cornerAngleRad: number;
}

export type SceneLightResult = { ok: true; value: SceneLight } | { ok: false; reason: string; path: string };

/** Resolve the task's scene against the device class; a light the device class lacks is a reason, not a throw. */
export function sceneLight(task: Pick<Task, 'scene'>, deviceClass: Pick<DeviceClass, 'lens' | 'sensor' | 'lights'>): SceneLightResult {
  const { sensor, lens } = deviceClass;
  const scene = task.scene;
  const ambient: Illuminant = scene?.illuminant ?? { type: 'monochromatic', wavelengthNm: sensor.designWavelengthNm };
  const path = spectralPathOf(deviceClass);
  let light: SceneLight['light'] = null;
  if (scene?.robotLight !== undefined) {
    const spec = deviceClass.lights?.find((l) => l.id === scene.robotLight);
    if (!spec) {
      const have = (deviceClass.lights ?? []).map((l) => l.id);
      return { ok: false, path: 'taskId', reason: `the task's scene switches on robot light "${scene.robotLight}", which the device class does not carry (it has ${have.length ? have.join(', ') : 'no lights'})` };
    }
    light = { spec, name: illuminantName(spec.illuminant), factors: spectralFactors(spec.illuminant, path), irradianceAt1mWM2: spec.radiantIntensityWPerSr ?? spec.irradianceAt1mWM2! };
  }
  const widthMm = umToMm(sensor.widthPx * sensor.pixelPitchUm);
  const heightMm = umToMm(sensor.heightPx * sensor.pixelPitchUm);
  return {
    ok: true,
    value: {
      ambient,
      ambientName: illuminantName(ambient),
      ambientFactors: spectralFactors(ambient, path),
      light,
      assumedMonochromatic: scene === undefined,
      temperatureC: scene?.temperatureC ?? sensor.operatingTemperatureC ?? sensor.darkCurrentRefTempC,
      cornerAngleRad: cornerFieldAngleRad(widthMm, heightMm, lens.focalLengthMm),
    },
  };
}

export interface PixelLightInput {
  luminanceCdM2: number;
  reflectance: number;
  distanceM: number;
  fieldAngleRad: number;
  workingFNumber: number;
  exposureUs: number;
}

export interface PixelLight {
  photons: number;
  electrons: number;
  /** Electrons from the ambient light and from the robot light. */
  ambientElectrons: number;
  lightElectrons: number;
}

/**
 * Photons and electrons of one pixel (not clipped). Throws RangeError when ambient light with a luminance has no
 * visible part (lux says nothing about its power): describe such light as a robot light in W/sr instead.
 */
export function pixelLight(light: SceneLight, lens: Pick<Lens, 'vignetting'>, pixelPitchUm: number, p: PixelLightInput): PixelLight {
  const exposureMs = usToMs(p.exposureUs);
  const amb = light.ambientFactors;
  let photons = 0;
  let ambientElectrons = 0;
  if (p.luminanceCdM2 > 0) {
    if (amb.photonsPerLmS === null || amb.electronsPerLmS === null) {
      throw new RangeError(`${light.ambientName} carries no visible light, so a luminance in cd/m² says nothing about its power`);
    }
    const lux = sensorPlaneFromScene(p.luminanceCdM2, p.workingFNumber, lens.vignetting, p.fieldAngleRad);
    photons += countFromIlluminance(amb.photonsPerLmS, lux, pixelPitchUm, exposureMs);
    ambientElectrons = countFromIlluminance(amb.electronsPerLmS, lux, pixelPitchUm, exposureMs);
  }
  let lightElectrons = 0;
  if (light.light) {
    const e = inverseSquareIrradianceWM2(light.light.irradianceAt1mWM2, p.distanceM);
    const radiance = lambertianRadianceWM2Sr(p.reflectance, e);
    const irradiance = sensorPlaneFromScene(radiance, p.workingFNumber, lens.vignetting, p.fieldAngleRad);
    photons += countFromIrradiance(light.light.factors.photonsPerJ, irradiance, pixelPitchUm, exposureMs);
    lightElectrons = countFromIrradiance(light.light.factors.electronsPerJ, irradiance, pixelPitchUm, exposureMs);
  }
  return { photons, electrons: ambientElectrons + lightElectrons, ambientElectrons, lightElectrons };
}

/** Noise terms of the sensor at a gain, exposure and temperature (sensor-noise.ts). */
export function noiseTerms(sensor: Sensor, analogGain: number, exposureUs: number, temperatureC: number): NoiseTerms {
  const k = systemGainDnPerE(sensor.gainDnPerE, analogGain);
  const darkEPerS = darkCurrentAtEPerS(sensor.darkCurrentEPerS, sensor.darkCurrentRefTempC, sensor.darkCurrentDoublingC, temperatureC);
  return {
    readNoiseE: readNoiseAtGainE(sensor.darkNoiseE, sensor.readNoiseByGain, analogGain),
    darkElectrons: darkEPerS * usToS(exposureUs),
    quantisationVarE2: quantisationVarianceE2(sensor.bitDepth, sensor.networkInputBits, k),
  };
}

export interface CameraAt {
  fNumber: number;
  focusDistanceM: number;
  exposureUs: number;
  analogGain: number;
}

export interface DarkPixel {
  electrons: number;
  snrDb: number;
  noise: NoiseTerms;
  workingFNumber: number;
}

export interface BrightPixel {
  /** Signal plus dark electrons, not clipped. */
  electrons: number;
  saturationE: number;
  percentOfSaturation: number;
  adcLimited: boolean;
}

/** Working f-number at the camera's focus (thin lens): N·(1 + f/(s − f)). */
export function workingFNumberAt(lens: Pick<Lens, 'focalLengthMm'>, fNumber: number, focusDistanceM: number): number {
  return workingFNumber(fNumber, magnificationAtFocus(lens.focalLengthMm, mToMm(focusDistanceM)));
}

/** SNR of the darkest pixel: the image corner at the lowest luminance, darkest reflectance, far end. Throws as pixelLight. */
export function darkPixel(light: SceneLight, deviceClass: Pick<DeviceClass, 'lens' | 'sensor'>, task: Pick<Task, 'luminanceMinCdM2' | 'farDistanceM' | 'scene'>, camera: CameraAt): DarkPixel {
  const { lens, sensor } = deviceClass;
  const nW = workingFNumberAt(lens, camera.fNumber, camera.focusDistanceM);
  const px = pixelLight(light, lens, sensor.pixelPitchUm, {
    luminanceCdM2: task.luminanceMinCdM2,
    reflectance: task.scene?.reflectanceMin ?? 0,
    distanceM: task.farDistanceM,
    fieldAngleRad: light.cornerAngleRad,
    workingFNumber: nW,
    exposureUs: camera.exposureUs,
  });
  const noise = noiseTerms(sensor, camera.analogGain, camera.exposureUs, light.temperatureC);
  const saturationE = saturationElectrons(sensor.fullWellE, sensor.bitDepth, sensor.gainDnPerE, camera.analogGain);
  const signal = Math.min(px.electrons, Math.max(0, saturationE - noise.darkElectrons));
  return { electrons: signal, snrDb: snrDbWithNoise(signal, noise), noise, workingFNumber: nW };
}

/** Share of saturation reached by the brightest pixel: the centre at the highest luminance, brightest reflectance, near end. */
export function brightPixel(light: SceneLight, deviceClass: Pick<DeviceClass, 'lens' | 'sensor'>, task: Pick<Task, 'luminanceMaxCdM2' | 'nearDistanceM' | 'scene'>, camera: CameraAt): BrightPixel {
  const { lens, sensor } = deviceClass;
  const nW = workingFNumberAt(lens, camera.fNumber, camera.focusDistanceM);
  const px = pixelLight(light, lens, sensor.pixelPitchUm, {
    luminanceCdM2: task.luminanceMaxCdM2,
    reflectance: task.scene?.reflectanceMax ?? 0,
    distanceM: task.nearDistanceM,
    fieldAngleRad: 0,
    workingFNumber: nW,
    exposureUs: camera.exposureUs,
  });
  const dark = noiseTerms(sensor, camera.analogGain, camera.exposureUs, light.temperatureC).darkElectrons;
  const saturationE = saturationElectrons(sensor.fullWellE, sensor.bitDepth, sensor.gainDnPerE, camera.analogGain);
  const electrons = px.electrons + dark;
  return { electrons, saturationE, percentOfSaturation: (100 * electrons) / saturationE, adcLimited: saturationE < sensor.fullWellE };
}
