import { releaseSchema, taskOf, type Release } from '../../protocol/release.js';
import type { Store } from '../../store/store.js';
import type { Calibration } from '../../validate/input.js';
import { CALIBRATION_MINIMUM, RECENT_WINDOWS_PER_DEVICE, fitThroughOrigin, isEnough, type RatioFit, type RatioSample, type SampleCounts } from './fit.js';

/** A fitted calibration: measured ÷ predicted inference latency and energy, with what it rests on. */
export interface CalibrationFit extends SampleCounts {
  latency: RatioFit;
  energy: RatioFit;
  /** True when the samples reach the minimum for this kind of fit (CALIBRATION_MINIMUM). */
  enough: boolean;
}

export interface DeviceCalibration extends CalibrationFit {
  deviceId: string;
  deviceClassId: string;
}

export interface ClassCalibration extends CalibrationFit {
  deviceClassId: string;
  /** Each device of the class that reported telemetry, fitted on its own. */
  perDevice: DeviceCalibration[];
}

export interface DeviceSamples {
  latency: RatioSample[];
  energy: RatioSample[];
  windows: number;
  frames: number;
}

interface Telemetry {
  task: string;
  releaseId: string;
  frames: number;
  inferenceMsMean: number;
  inferenceMjMean: number;
}

export interface Calibrator {
  device(deviceId: string): DeviceCalibration | null;
  /** The class fit over all its devices' recent telemetry (or all but one device, for drift). */
  deviceClass(deviceClassId: string, options?: { excludeDeviceId?: string }): ClassCalibration;
  /** The class fit in the validator's form, or null while there is not enough data. */
  forValidator(deviceClassId: string): Calibration | null;
  /** The raw samples of every device of a class (those without telemetry included, empty). */
  classSamples(deviceClassId: string): Array<{ deviceId: string; samples: DeviceSamples }>;
}

function fitOf(samples: DeviceSamples[], minimum: SampleCounts): CalibrationFit {
  const used = samples.filter((s) => s.windows > 0);
  const counts = {
    windows: used.reduce((n, s) => n + s.windows, 0),
    frames: used.reduce((n, s) => n + s.frames, 0),
    devices: used.length,
  };
  return {
    ...counts,
    latency: fitThroughOrigin(used.flatMap((s) => s.latency)),
    energy: fitThroughOrigin(used.flatMap((s) => s.energy)),
    enough: isEnough(counts, minimum),
  };
}

/**
 * Calibration from telemetry: each window's mean inference time and energy against the prediction the
 * release shipped for that task, weighted by the window's frames, over each device's latest
 * RECENT_WINDOWS_PER_DEVICE windows. Releases are read once per call and cached.
 */
export function createCalibrator(store: Pick<Store, 'eventRanges' | 'devices' | 'releases'>): Calibrator {
  const reader = store.eventRanges;
  const releases = new Map<string, Release | null>();

  function releaseOf(id: string): Release | null {
    if (!releases.has(id)) {
      let release: Release | null = null;
      try {
        release = store.releases.get(id)?.parsed.release ?? null;
      } catch {
        // An unreadable stored release predicts nothing: its telemetry is left out of the fit.
      }
      releases.set(id, release);
    }
    return releases.get(id)!;
  }

  function samplesOf(deviceId: string): DeviceSamples {
    const out: DeviceSamples = { latency: [], energy: [], windows: 0, frames: 0 };
    for (const e of reader.latest(deviceId, 'telemetry', RECENT_WINDOWS_PER_DEVICE)) {
      const t = e.event as unknown as Telemetry;
      const release = releaseOf(t.releaseId);
      // Own properties only: a device-reported name such as `constructor` is not a task.
      const predicted = release ? taskOf(release, String(t.task))?.predicted : undefined;
      if (!predicted || !(t.frames > 0)) continue;
      out.latency.push({ measured: t.inferenceMsMean, predicted: predicted.inferenceMs, weight: t.frames });
      out.energy.push({ measured: t.inferenceMjMean, predicted: predicted.inferenceMj, weight: t.frames });
      out.windows += 1;
      out.frames += t.frames;
    }
    return out;
  }

  function device(deviceId: string): DeviceCalibration | null {
    const d = store.devices.get(deviceId);
    if (!d) return null;
    return { deviceId, deviceClassId: d.deviceClassId, ...fitOf([samplesOf(deviceId)], CALIBRATION_MINIMUM.device) };
  }

  function deviceClass(deviceClassId: string, options: { excludeDeviceId?: string } = {}): ClassCalibration {
    const members = store.devices.list({ deviceClassId }).filter((d) => d.id !== options.excludeDeviceId);
    const perDevice = members.map((d) => ({ id: d.id, samples: samplesOf(d.id) }));
    const fits = perDevice
      .filter((p) => p.samples.windows > 0)
      .map((p) => ({ deviceId: p.id, deviceClassId, ...fitOf([p.samples], CALIBRATION_MINIMUM.device) }));
    return { deviceClassId, ...fitOf(perDevice.map((p) => p.samples), CALIBRATION_MINIMUM.deviceClass), perDevice: fits };
  }

  return {
    device,
    deviceClass,
    classSamples: (deviceClassId) => store.devices.list({ deviceClassId }).map((d) => ({ deviceId: d.id, samples: samplesOf(d.id) })),
    forValidator: function forValidator(deviceClassId) {
      const fit = deviceClass(deviceClassId);
      if (!fit.enough || fit.latency.factor === null || fit.energy.factor === null) return null;
      return { latencyFactor: fit.latency.factor, energyFactor: fit.energy.factor, samples: fit.windows };
    },
  };
}
