/**
 * Per-frame latency and energy of the whole pipeline, stage after stage: exposure, sensor readout,
 * image signal processing, inference (sequential, no overlap between stages; a conservative budget).
 */
import type { DeviceClass } from '../schema/device-class.js';
import { mwToW, pjToMj, usToMs } from './units.js';

export interface FrameBudgetInput {
  exposureUs: number;
  sensor: DeviceClass['sensor'];
  isp: DeviceClass['isp'];
  inferenceMs: number;
  inferenceMj: number;
  frameRateHz: number;
}

export interface FrameBudget {
  latency: { exposureMs: number; readoutMs: number; ispMs: number; inferenceMs: number; totalMs: number };
  energy: { readoutMj: number; ispMj: number; inferenceMj: number; totalMj: number };
  /** Average power at the frame rate: totalMj × frameRateHz / 1000. */
  averagePowerW: number;
}

/** Latency = exposure + readout + ISP + inference; energy = readout and ISP (pJ/pixel × pixels) + inference. */
export function frameBudget(input: FrameBudgetInput): FrameBudget {
  const pixels = input.sensor.widthPx * input.sensor.heightPx;
  const exposureMs = usToMs(input.exposureUs);
  const readoutMs = input.sensor.readoutMsPerFrame;
  const ispMs = input.isp.latencyMsPerFrame;
  const readoutMj = pjToMj(input.sensor.readoutEnergyPjPerPixel * pixels);
  const ispMj = pjToMj(input.isp.energyPjPerPixel * pixels);
  const totalMj = readoutMj + ispMj + input.inferenceMj;
  return {
    latency: { exposureMs, readoutMs, ispMs, inferenceMs: input.inferenceMs, totalMs: exposureMs + readoutMs + ispMs + input.inferenceMs },
    energy: { readoutMj, ispMj, inferenceMj: input.inferenceMj, totalMj },
    // mJ per frame × frames per second = mJ/s = mW.
    averagePowerW: mwToW(totalMj * input.frameRateHz),
  };
}
