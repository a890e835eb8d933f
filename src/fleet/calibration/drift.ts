import type { DriftQuantity, DriftRecord } from '../../store/drift.js';
import type { Store } from '../../store/store.js';
import { CALIBRATION_MINIMUM, isEnough, type RatioSample } from './fit.js';
import { createCalibrator, type DeviceSamples } from './calibrator.js';

/** A device drifts when its fitted ratio differs from the rest of its class by more than this fraction. */
export const DEFAULT_DRIFT_TOLERANCE = 0.15;

export interface DriftChange {
  kind: 'onset' | 'cleared';
  record: DriftRecord;
}

export interface DriftMonitor {
  /** Compares every device with enough telemetry against the rest of its class; stores onsets and clears. */
  check(): DriftChange[];
}

interface Sums {
  smp: number;
  spp: number;
}

function sums(samples: readonly RatioSample[]): Sums {
  let smp = 0;
  let spp = 0;
  for (const s of samples) {
    if (!(s.weight > 0) || !(s.predicted > 0)) continue;
    smp += s.weight * s.measured * s.predicted;
    spp += s.weight * s.predicted * s.predicted;
  }
  return { smp, spp };
}

const QUANTITIES: ReadonlyArray<{ quantity: DriftQuantity; pick: (s: DeviceSamples) => RatioSample[] }> = [
  { quantity: 'latency', pick: (s) => s.latency },
  { quantity: 'energy', pick: (s) => s.energy },
];

/**
 * Drift: a device's least-squares ratio (k = Σw·m·p ÷ Σw·p², see calibration-fit.ts) against the same ratio over
 * the rest of its class, computed from sums so each device costs no refit. An episode opens once when the
 * deviation first exceeds the tolerance and closes when the device is back within it, so a drifting device
 * raises one record per onset, not one per check. Needs enough data on both sides (CALIBRATION_MINIMUM; the
 * rest of the class needs the class's windows and frames from at least two devices).
 */
export function createDriftMonitor(deps: { store: Pick<Store, 'eventRanges' | 'drift' | 'devices' | 'releases' | 'transaction'>; clock: { now(): Date }; tolerance?: number }): DriftMonitor {
  const { store, clock } = deps;
  const tolerance = deps.tolerance ?? DEFAULT_DRIFT_TOLERANCE;
  const repo = store.drift;
  const restMinimum = { ...CALIBRATION_MINIMUM.deviceClass, devices: 2 };

  return {
    check: function check() {
      const calibrator = createCalibrator(store);
      const classes = [...new Set(store.devices.list().map((d) => d.deviceClassId))];
      const changes: DriftChange[] = [];
      const at = clock.now().toISOString();
      for (const deviceClassId of classes) {
        const members = calibrator.classSamples(deviceClassId).filter((m) => m.samples.windows > 0);
        const total = { windows: 0, frames: 0, devices: members.length };
        for (const m of members) {
          total.windows += m.samples.windows;
          total.frames += m.samples.frames;
        }
        for (const { quantity, pick } of QUANTITIES) {
          const perDevice = members.map((m) => ({ ...m, sums: sums(pick(m.samples)) }));
          const all = perDevice.reduce((a, m) => ({ smp: a.smp + m.sums.smp, spp: a.spp + m.sums.spp }), { smp: 0, spp: 0 });
          for (const m of perDevice) {
            const rest = { windows: total.windows - m.samples.windows, frames: total.frames - m.samples.frames, devices: total.devices - 1 };
            if (!isEnough({ ...m.samples, devices: 1 }, CALIBRATION_MINIMUM.device) || !isEnough(rest, restMinimum)) continue;
            if (!(m.sums.spp > 0) || !(all.spp - m.sums.spp > 0)) continue;
            const deviceFactor = m.sums.smp / m.sums.spp;
            const classFactor = (all.smp - m.sums.smp) / (all.spp - m.sums.spp);
            const deviation = deviceFactor / classFactor - 1;
            const open = repo.open(m.deviceId, quantity);
            if (Math.abs(deviation) > tolerance && !open) {
              const record = store.transaction(() =>
                repo.onset({ deviceId: m.deviceId, deviceClassId, quantity, onsetAt: at, deviceFactor, classFactor, deviation, tolerance }),
              );
              changes.push({ kind: 'onset', record });
            } else if (Math.abs(deviation) <= tolerance && open) {
              repo.clear(open.id, at);
              changes.push({ kind: 'cleared', record: { ...open, clearedAt: at } });
            }
          }
        }
      }
      return changes;
    },
  };
}
