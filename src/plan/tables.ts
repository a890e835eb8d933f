/**
 * Figures precomputed per factor of the search space, with the same physics calls, in the same order,
 * as the validator makes them, so that every candidate's figures come out identical to validate()'s:
 *  - image per (f-number, focus, exposure): worst combined blur (one MTF of defocus, diffraction, pixel and
 *    motion) over the sampled range, sensor px, and per model in the unit of its curve;
 *  - signal per (f-number, focus, exposure, gain): dark-corner SNR and bright-centre share of saturation
 *    (the working f-number depends on the focus), from the scene's light integrated once;
 *  - motion per exposure; model accuracy per (model, image) and per (model, signal);
 *  - compute per (model, memory partition): inference cost, then the frame budget (latency, energy with idle
 *    draw and the robot light, power, throughput) per exposure.
 * Each table is a flat typed array; the inner loop only looks figures up.
 */
import { acceleratorTotals } from '../physics/accelerator.js';
import type { AcceleratorTotals } from '../physics/accelerator.js';
import { acceleratorIdlePowerMw, frameBudget } from '../physics/frame-budget.js';
import { smearPx } from '../physics/motion.js';
import type { NetworkAnalysis } from '../physics/network-cost.js';
import { objectPixelSizeMm } from '../physics/optics.js';
import { brightPixel, darkPixel, sceneLight } from '../physics/scene-signal.js';
import { mToMm, sToUs } from '../physics/units.js';
import type { DeviceClass, Model, Network, Task } from '../schema/index.js';
import { MIN_CALIBRATION_SAMPLES, accuracyAtBlur, accuracyAtSnr, curvesFor, downscaleFactor, imageSetup, toleratedBlurPx, worstCombinedBlurPx } from '../validate/index.js';
import type { Calibration } from '../validate/index.js';
import type { SearchAxes } from './types.js';

export interface PlannedModel {
  model: Model;
  /** The network costed: the shipped one when the model takes its network from its weights. */
  network: Network;
  analysis: NetworkAnalysis;
  /** The declared network, when `network` is the shipped one (the validator checks the two match). */
  declaredNetwork?: Network;
}

export interface PlanTables {
  task: Task;
  deviceClass: DeviceClass;
  axes: SearchAxes;
  models: PlannedModel[];
  /** Sizes of the axes, in the order of the candidate index: model, partition, exposure, f-number, focus, gain. */
  M: number;
  P: number;
  E: number;
  F: number;
  S: number;
  G: number;
  // per model; tolerated blur and the curve's last blur in the unit of the model's curve (Infinity: no curve)
  pixelsOnFeaturePx: Float64Array;
  toleratedBlurPx: Float64Array;
  curveEndPx: Float64Array;
  motionLimitPx: Float64Array;
  // per exposure
  motionBlurPx: Float64Array;
  framePeriodUs: number;
  // per (f, s, e): worst combined blur, sensor px
  worstBlurPx: Float64Array;
  // per (m, f, s, e): the same in the model's unit, and the accuracy there (NaN without an accuracy-vs-blur curve)
  modelBlurPx: Float64Array;
  accuracyAtBlur: Float64Array;
  // per (f, s, e, g); NaN SNR when it cannot be estimated
  snrDarkDb: Float64Array;
  clippingPercent: Float64Array;
  // per (m, f, s, e, g); NaN when the model has no accuracy-vs-SNR curve or the SNR is unknown
  accuracyAtSnr: Float64Array;
  // per (m, p, e)
  energyMj: Float64Array;
  averagePowerW: Float64Array;
  latencyMs: Float64Array;
  /** The busiest pipeline stage, ms, and the frame period it must fit. */
  busiestStageMs: Float64Array;
  framePeriodMs: number;
}

function calibrationFactors(calibration: Calibration | undefined): { latency: number; energy: number } {
  if (!calibration || calibration.samples < MIN_CALIBRATION_SAMPLES) return { latency: 1, energy: 1 };
  return { latency: calibration.latencyFactor, energy: calibration.energyFactor };
}

/** Build every table for the given axes. Throws only what the physics throws for an uncostable network. */
export function buildTables(
  task: Task,
  deviceClass: DeviceClass,
  models: PlannedModel[],
  axes: SearchAxes,
  calibration?: Calibration,
): PlanTables {
  const { lens, sensor, isp, accelerator } = deviceClass;
  const M = models.length;
  const P = axes.memoryPartitions.length;
  const E = axes.exposuresUs.length;
  const F = axes.fNumbers.length;
  const S = axes.focusDistancesM.length;
  const G = axes.analogGains.length;

  const pixelsOnFeaturePx = new Float64Array(M);
  const toleratedBlur = new Float64Array(M);
  const curveEnd = new Float64Array(M);
  const motionLimitPx = new Float64Array(M);
  const inputPerSensorPx = new Float64Array(M);
  const footprintMm = objectPixelSizeMm(mToMm(task.farDistanceM), sensor.pixelPitchUm, lens.focalLengthMm);
  const sensorPx = task.featureSizeMm / footprintMm;
  const curves = models.map(({ model }) => curvesFor(model, task.id));
  models.forEach(({ model }, m) => {
    const scale = sensor.widthPx > model.inputWidthPx ? model.inputWidthPx / sensor.widthPx : 1;
    pixelsOnFeaturePx[m] = sensorPx * scale;
    const tolerance = toleratedBlurPx(curves[m]!, task.minAccuracy);
    toleratedBlur[m] = tolerance.blurPx;
    const blurCurve = curves[m]!.accuracyVsBlur;
    curveEnd[m] = blurCurve ? blurCurve[blurCurve.length - 1]!.blurPx : Infinity;
    const downscale = downscaleFactor(sensor.widthPx, model.inputWidthPx);
    // The validator's conversions: input px = sensor px ÷ downscale; a tolerance in input px covers downscale sensor px.
    inputPerSensorPx[m] = tolerance.unit === 'input-px' ? downscale : 1;
    motionLimitPx[m] = task.maxMotionBlurPx ?? (tolerance.unit === 'input-px' ? tolerance.blurPx * downscale : tolerance.blurPx);
  });

  const setups = axes.exposuresUs.map((e) => imageSetup(task, deviceClass, e, sensor.widthPx));
  const motion = new Float64Array(E);
  setups.forEach((setup, i) => {
    motion[i] = smearPx(setup.motion, setup.smearTimeUs, setup.focalLengthMm, task.nearDistanceM, setup.pixelPitchUm);
  });

  const worstBlur = new Float64Array(F * S * E);
  const modelBlur = new Float64Array(M * F * S * E);
  const accBlur = new Float64Array(M * F * S * E);
  for (let f = 0; f < F; f++) {
    for (let s = 0; s < S; s++) {
      for (let e = 0; e < E; e++) {
        const fse = (f * S + s) * E + e;
        const w = worstCombinedBlurPx(task, setups[e]!, axes.fNumbers[f]!, axes.focusDistancesM[s]!);
        worstBlur[fse] = w;
        for (let m = 0; m < M; m++) {
          const inUnit = inputPerSensorPx[m] === 1 ? w : w / inputPerSensorPx[m]!;
          const blurCurve = curves[m]!.accuracyVsBlur;
          modelBlur[m * F * S * E + fse] = inUnit;
          accBlur[m * F * S * E + fse] = blurCurve ? accuracyAtBlur(blurCurve, inUnit).y : NaN;
        }
      }
    }
  }

  const snr = new Float64Array(F * S * E * G);
  const clipping = new Float64Array(F * S * E * G);
  const accSnr = new Float64Array(M * F * S * E * G);
  const light = sceneLight(task, deviceClass);
  for (let f = 0; f < F; f++) {
    for (let s = 0; s < S; s++) {
      for (let e = 0; e < E; e++) {
        for (let g = 0; g < G; g++) {
          const camera = { fNumber: axes.fNumbers[f]!, focusDistanceM: axes.focusDistancesM[s]!, exposureUs: axes.exposuresUs[e]!, analogGain: axes.analogGains[g]! };
          const i = ((f * S + s) * E + e) * G + g;
          let snrDb = NaN;
          let percent = NaN;
          if (light.ok) {
            try {
              snrDb = darkPixel(light.value, deviceClass, task, camera).snrDb;
              percent = brightPixel(light.value, deviceClass, task, camera).percentOfSaturation;
            } catch {
              // Light the validator cannot estimate fails both checks there too.
            }
          }
          snr[i] = snrDb;
          clipping[i] = percent;
          curves.forEach((c, m) => {
            accSnr[m * F * S * E * G + i] = c.accuracyVsSnr && !Number.isNaN(snrDb) ? accuracyAtSnr(c.accuracyVsSnr, snrDb).y : NaN;
          });
        }
      }
    }
  }

  const cal = calibrationFactors(calibration);
  const energyMj = new Float64Array(M * P * E);
  const powerW = new Float64Array(M * P * E);
  const latencyMs = new Float64Array(M * P * E);
  const busiestMs = new Float64Array(M * P * E);
  const robotLight = task.scene?.robotLight !== undefined ? (deviceClass.lights?.find((l) => l.id === task.scene!.robotLight) ?? null) : null;
  const acceleratorIdleMw = acceleratorIdlePowerMw(accelerator);
  let framePeriodMs = 0;
  // Inference cost per (network, partition): models that share a network share its costs.
  const costsByNetwork = new Map<Network, AcceleratorTotals[]>();
  models.forEach(({ network, analysis }, m) => {
    let costs = costsByNetwork.get(network);
    if (!costs) {
      costs = axes.memoryPartitions.map((partition) => acceleratorTotals(analysis, accelerator, partition));
      costsByNetwork.set(network, costs);
    }
    axes.memoryPartitions.forEach((_, p) => {
      const cost = costs[p]!;
      const inferenceMs = cost.latencyMs * cal.latency;
      const inferenceMj = cost.energyMj * cal.energy;
      for (let e = 0; e < E; e++) {
        const budget = frameBudget({ exposureUs: axes.exposuresUs[e]!, sensor, isp, inferenceMs, inferenceMj, acceleratorIdleMw, light: robotLight, frameRateHz: task.frameRateHz });
        const k = (m * P + p) * E + e;
        latencyMs[k] = budget.latency.totalMs;
        energyMj[k] = budget.energy.totalMj;
        powerW[k] = budget.averagePowerW;
        busiestMs[k] = budget.throughput.busiestMs;
        framePeriodMs = budget.throughput.framePeriodMs;
      }
    });
  });

  return {
    task, deviceClass, axes, models, M, P, E, F, S, G,
    pixelsOnFeaturePx, toleratedBlurPx: toleratedBlur, curveEndPx: curveEnd, motionLimitPx,
    motionBlurPx: motion, framePeriodUs: sToUs(1 / task.frameRateHz),
    worstBlurPx: worstBlur, modelBlurPx: modelBlur, accuracyAtBlur: accBlur,
    snrDarkDb: snr, clippingPercent: clipping, accuracyAtSnr: accSnr,
    energyMj, averagePowerW: powerW, latencyMs, busiestStageMs: busiestMs, framePeriodMs,
  };
}
