import { acceleratorIdlePowerMw, frameBudget } from '../physics/frame-budget.js';
import { bytesToKib } from '../physics/units.js';
import { BYTES_PER_ELEMENT } from '../schema/index.js';
import type { Check } from '../schema/index.js';
import { againstMax, fmt, makeCheck } from './check.js';
import { cachedAcceleratorCost, cachedAnalysis } from './cost-cache.js';
import type { Calibration, ValidationInput } from './input.js';

/** Calibration is applied only when it rests on at least this many measured frames. */
export const MIN_CALIBRATION_SAMPLES = 5;

type Budget = ReturnType<typeof frameBudget>;

export interface InferenceFigures {
  macs: number;
  params: number;
  dramBytes: number;
  weightsResident: boolean;
  residentWeightBytes: number;
  weightLoadMs: number;
}

export interface ComputeResult {
  checks: Check[];
  budget: Budget | null;
  inference: InferenceFigures | null;
}

function calibrationNote(calibration: Calibration | undefined): { latency: number; energy: number; note: string } {
  if (!calibration) return { latency: 1, energy: 1, note: '' };
  if (calibration.samples < MIN_CALIBRATION_SAMPLES) {
    return { latency: 1, energy: 1, note: `; calibration not applied: ${calibration.samples} samples, fewer than the ${MIN_CALIBRATION_SAMPLES} needed` };
  }
  return {
    latency: calibration.latencyFactor,
    energy: calibration.energyFactor,
    note: `; inference scaled by calibration ×${fmt(calibration.latencyFactor)} latency, ×${fmt(calibration.energyFactor)} energy (${calibration.samples} samples)`,
  };
}

/** Memory, latency, energy and power of one frame, from the roofline cost of the network and the frame budget. */
export function computeChecks(input: ValidationInput, calibration?: Calibration): ComputeResult {
  const { profile, task, deviceClass, network } = input;
  const { accelerator, sensor, isp, platform } = deviceClass;
  let analysis;
  let cost;
  try {
    analysis = cachedAnalysis(network);
    cost = cachedAcceleratorCost(network, accelerator, profile.memory);
  } catch (e) {
    const reason = e instanceof Error ? e.message : String(e);
    return { checks: [makeCheck('network-cost', 'fail', null, null, '', 'modelId', `network ${network.id ?? '(no id)'} cannot be costed: ${reason}`)], budget: null, inference: null };
  }
  const cal = calibrationNote(calibration);
  const inferenceMs = cost.latencyMs * cal.latency;
  const inferenceMj = cost.energyMj * cal.energy;
  const light = robotLightOf(input);
  const budget = frameBudget({
    exposureUs: profile.camera.exposureUs, sensor, isp, inferenceMs, inferenceMj,
    acceleratorIdleMw: acceleratorIdlePowerMw(accelerator), light, frameRateHz: task.frameRateHz,
  });
  const inference = { macs: analysis.macs, params: analysis.params, dramBytes: cost.dramBytes, weightsResident: cost.weightsResident, residentWeightBytes: cost.residentWeightBytes, weightLoadMs: cost.weightLoadMs };
  // The inference stage points at the memory partition when weights stream from DRAM, else at the model.
  const inferencePath = cost.weightsResident ? 'modelId' : 'memory.weightBufferKib';
  const checks: Check[] = [];

  const { weightBufferKib, activationBufferKib } = profile.memory;
  const partitionKib = weightBufferKib + activationBufferKib;
  const m = againstMax(partitionKib, accelerator.sramKib, 'KiB', 'the {} of on-chip SRAM');
  const bytesPer = BYTES_PER_ELEMENT[accelerator.precision];
  const weightKib = bytesToKib(cost.weightBytes);
  const peakActKib = bytesToKib(analysis.peakActivationElements * bytesPer);
  const residentKib = bytesToKib(cost.residentWeightBytes);
  const weightsNote = cost.weightsResident
    ? `weights ${fmt(weightKib)} KiB stay resident in the weight buffer`
    : `weights ${fmt(weightKib)} KiB exceed the ${fmt(weightBufferKib)} KiB weight buffer: ${fmt(residentKib)} KiB of the largest layers stay resident, the rest streams from DRAM every frame`;
  const actNote = peakActKib <= activationBufferKib
    ? `peak activations ${fmt(peakActKib)} KiB fit the ${fmt(activationBufferKib)} KiB activation buffer`
    : `peak activations ${fmt(peakActKib)} KiB exceed the ${fmt(activationBufferKib)} KiB activation buffer and spill to DRAM`;
  checks.push(makeCheck('memory-fits-sram', m.ok ? 'pass' : 'fail', partitionKib, accelerator.sramKib, 'KiB', 'memory',
    `weight + activation buffers ${fmt(weightBufferKib)} + ${fmt(activationBufferKib)} = ${fmt(partitionKib)} KiB ${m.text}; ${weightsNote}; ${actNote}`));

  const lat = budget.latency;
  const latStages: [string, number, string][] = [
    ['exposure', lat.exposureMs, 'camera.exposureUs'],
    ['readout', lat.readoutMs, 'deviceClassId'],
    ['ISP', lat.ispMs, 'deviceClassId'],
    ['inference', lat.inferenceMs, inferencePath],
  ];
  const l = againstMax(lat.totalMs, task.latencyBudgetMs, 'ms', 'the latency budget of {}');
  checks.push(makeCheck('latency', l.ok ? 'pass' : 'fail', lat.totalMs, task.latencyBudgetMs, 'ms', largest(latStages),
    `end-to-end latency ${fmt(lat.totalMs)} ms (${latStages.map(([n, v]) => `${n} ${fmt(v)}`).join(' + ')} ms) ${l.text}${cal.note}`));

  const en = budget.energy;
  // Idle draw between frames belongs to the device class, except the accelerator's when gating is a choice of the class too.
  const enStages: [string, number, string][] = [
    ['readout', en.readoutMj, 'deviceClassId'],
    ['ISP', en.ispMj, 'deviceClassId'],
    ['inference', en.inferenceMj, inferencePath],
    ['light', en.lightMj, 'camera.exposureUs'],
    ['idle', en.idleMj, 'deviceClassId'],
  ];
  const shown = enStages.filter(([n, v]) => v > 0 || n === 'readout' || n === 'ISP' || n === 'inference');
  const idleNote = accelerator.powerGated ? 'accelerator power-gated between frames' : `accelerator idles at ${fmt(acceleratorIdlePowerMw(accelerator))} mW between frames (not power-gated)`;
  const e = againstMax(en.totalMj, task.energyBudgetMjPerFrame, 'mJ', 'the per-frame energy budget of {}');
  checks.push(makeCheck('energy-per-frame', e.ok ? 'pass' : 'fail', en.totalMj, task.energyBudgetMjPerFrame, 'mJ', largest(enStages),
    `energy ${fmt(en.totalMj)} mJ per frame (${shown.map(([n, v]) => `${n} ${fmt(v)}`).join(' + ')} mJ; ${idleNote}) ${e.text}${cal.note}`));

  const p = againstMax(budget.averagePowerW, platform.powerBudgetW, 'W', 'the platform power budget of {}');
  checks.push(makeCheck('average-power', p.ok ? 'pass' : 'fail', budget.averagePowerW, platform.powerBudgetW, 'W', largest(enStages),
    `the vision pipeline's share of power, ${fmt(budget.averagePowerW)} W over the ${fmt(budget.throughput.framePeriodMs)} ms frame period at ${fmt(task.frameRateHz)} Hz (busy and idle draw of sensor, ISP, accelerator${light ? ' and light' : ''}), ${p.text}; the rest of the robot is not counted here`));

  const tp = budget.throughput;
  const tpStages: [string, number, string][] = [
    [sensor.exposureDuringReadout ? 'sensor (exposure overlapping readout)' : 'sensor (exposure + readout)', tp.sensorMs, 'camera.exposureUs'],
    ['ISP', tp.ispMs, 'deviceClassId'],
    ['inference', tp.inferenceMs, inferencePath],
  ];
  const busiest = tpStages.reduce((w, s) => (s[1] > w[1] ? s : w), tpStages[0]!);
  const t = againstMax(tp.busiestMs, tp.framePeriodMs, 'ms', `the {} frame period at ${fmt(task.frameRateHz)} Hz`);
  checks.push(makeCheck('throughput', t.ok ? 'pass' : 'fail', tp.busiestMs, tp.framePeriodMs, 'ms', busiest[2],
    `the busiest pipeline stage, ${busiest[0]} at ${fmt(busiest[1])} ms (${tpStages.map(([n, v]) => `${n.split(' ')[0]} ${fmt(v)}`).join(', ')} ms), ${t.text}${t.ok ? '' : `: the pipeline cannot deliver ${fmt(task.frameRateHz)} frames per second`}${cal.note}`));

  return { checks, budget, inference };
}

/** The robot light the task switches on, when the device class carries it (a missing light is reported by the signal checks). */
function robotLightOf(input: ValidationInput) {
  const id = input.task.scene?.robotLight;
  if (id === undefined) return null;
  return input.deviceClass.lights?.find((l) => l.id === id) ?? null;
}

function largest(stages: [string, number, string][]): string {
  return stages.reduce((w, s) => (s[1] > w[1] ? s : w), stages[0]!)[2];
}
