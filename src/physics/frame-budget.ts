/**
 * Per-frame latency, energy, power and throughput of the whole pipeline: exposure, sensor readout, image
 * signal processing, inference, and the robot's light.
 *  - Latency: the stages one after another (no overlap within a frame; a conservative budget).
 *  - Energy per frame: for each component, its energy while busy plus its idle power over the rest of the
 *    frame period, E = E_busy + P_idle·(T_frame − t_busy) (common practice for duty-cycled systems).
 *    The accelerator idles at its static power unless it is power-gated between frames (then 0).
 *  - Average power = energy per frame / frame period.
 *  - Throughput: frames can overlap across stages (pipelining), so the frame rate is bounded by the busiest
 *    stage: sensor (exposure + readout, or the longer of the two when the sensor exposes during readout),
 *    ISP, inference. That stage must fit the frame period.
 */
import type { DeviceClass } from '../schema/device-class.js';
import type { RobotLight } from '../schema/light.js';
import { mwMsToMj, mwToW, pjToMj, sToMs, usToMs } from './units.js';

export interface FrameBudgetInput {
  exposureUs: number;
  sensor: Pick<DeviceClass['sensor'], 'widthPx' | 'heightPx' | 'readoutMsPerFrame' | 'readoutEnergyPjPerPixel'> &
    Partial<Pick<DeviceClass['sensor'], 'activePowerMw' | 'idlePowerMw' | 'exposureDuringReadout'>>;
  isp: Pick<DeviceClass['isp'], 'latencyMsPerFrame' | 'energyPjPerPixel'> & Partial<Pick<DeviceClass['isp'], 'idlePowerMw'>>;
  inferenceMs: number;
  /** Energy of the accelerator while it infers (dynamic plus static over the inference). */
  inferenceMj: number;
  /** Draw of the accelerator between inferences (see acceleratorIdlePowerMw). */
  acceleratorIdleMw?: number;
  /** The robot light switched on for the task, if any. */
  light?: Pick<RobotLight, 'electricalPowerW' | 'syncedToExposure' | 'idlePowerMw'> | null;
  frameRateHz: number;
}

export type PipelineStage = 'sensor' | 'ISP' | 'inference';

export interface FrameBudget {
  latency: { exposureMs: number; readoutMs: number; ispMs: number; inferenceMs: number; totalMs: number };
  energy: {
    /** Sensor while exposing and reading out: readout energy per pixel plus active power. */
    readoutMj: number;
    ispMj: number;
    inferenceMj: number;
    lightMj: number;
    /** Idle draw of every component between its busy moments. */
    idleMj: number;
    idle: { sensorMj: number; ispMj: number; acceleratorMj: number; lightMj: number };
    totalMj: number;
  };
  /** Average power over the frame period: totalMj × frameRateHz / 1000. */
  averagePowerW: number;
  throughput: { framePeriodMs: number; sensorMs: number; ispMs: number; inferenceMs: number; busiestMs: number; busiest: PipelineStage };
}

/** The accelerator's draw between inferences: 0 when power-gated, else its idle power (default: its static power). */
export function acceleratorIdlePowerMw(accelerator: Pick<DeviceClass['accelerator'], 'powerGated' | 'idlePowerMw' | 'staticPowerMw'>): number {
  if (accelerator.powerGated) return 0;
  return accelerator.idlePowerMw ?? accelerator.staticPowerMw;
}

const rest = (periodMs: number, busyMs: number): number => Math.max(0, periodMs - busyMs);

/** Latency, energy, power and throughput of one frame (see the module comment). */
export function frameBudget(input: FrameBudgetInput): FrameBudget {
  const { sensor, isp } = input;
  const pixels = sensor.widthPx * sensor.heightPx;
  const periodMs = sToMs(1 / input.frameRateHz);
  const exposureMs = usToMs(input.exposureUs);
  const readoutMs = sensor.readoutMsPerFrame;
  const ispMs = isp.latencyMsPerFrame;
  const inferenceMs = input.inferenceMs;

  const sensorBusyMs = exposureMs + readoutMs;
  const readoutMj = pjToMj(sensor.readoutEnergyPjPerPixel * pixels) + mwMsToMj(sensor.activePowerMw ?? 0, sensorBusyMs);
  const ispMj = pjToMj(isp.energyPjPerPixel * pixels);
  const light = input.light ?? null;
  const lightOnMs = light ? (light.syncedToExposure ? Math.min(exposureMs, periodMs) : periodMs) : 0;
  const lightMj = light ? mwMsToMj(light.electricalPowerW * 1000, lightOnMs) : 0;
  const idle = {
    sensorMj: mwMsToMj(sensor.idlePowerMw ?? 0, rest(periodMs, sensorBusyMs)),
    ispMj: mwMsToMj(isp.idlePowerMw ?? 0, rest(periodMs, ispMs)),
    acceleratorMj: mwMsToMj(input.acceleratorIdleMw ?? 0, rest(periodMs, inferenceMs)),
    lightMj: light ? mwMsToMj(light.idlePowerMw, rest(periodMs, lightOnMs)) : 0,
  };
  const idleMj = idle.sensorMj + idle.ispMj + idle.acceleratorMj + idle.lightMj;
  const totalMj = readoutMj + ispMj + input.inferenceMj + lightMj + idleMj;

  const sensorStageMs = sensor.exposureDuringReadout ? Math.max(exposureMs, readoutMs) : exposureMs + readoutMs;
  const stages: [PipelineStage, number][] = [['sensor', sensorStageMs], ['ISP', ispMs], ['inference', inferenceMs]];
  let busiest = stages[0]!;
  for (const s of stages) if (s[1] > busiest[1]) busiest = s;

  return {
    latency: { exposureMs, readoutMs, ispMs, inferenceMs, totalMs: exposureMs + readoutMs + ispMs + inferenceMs },
    energy: { readoutMj, ispMj, inferenceMj: input.inferenceMj, lightMj, idleMj, idle, totalMj },
    // mJ per frame × frames per second = mJ/s = mW.
    averagePowerW: mwToW(totalMj * input.frameRateHz),
    throughput: { framePeriodMs: periodMs, sensorMs: sensorStageMs, ispMs, inferenceMs, busiestMs: busiest[1], busiest: busiest[0] },
  };
}
