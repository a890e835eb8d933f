// Hand-workable inputs for the validator tests. Invented numbers, chosen so every figure can be worked by hand.
import { deviceClassSchema, modelSchema, networkSchema, profileSchema, taskSchema } from '../../src/schema/index.js';
import type { ValidationInput } from '../../src/validate/index.js';

type Patch = {
  profile?: { camera?: Record<string, number>; memory?: Record<string, number>; [k: string]: unknown };
  task?: Record<string, unknown>;
  deviceClass?: { [part: string]: Record<string, unknown> };
  model?: Record<string, unknown>;
  network?: Record<string, unknown>;
};

/**
 * A 10 mm lens on a 1000×800 sensor with 5 µm pixels; a two-layer network of 9,472 MACs on a
 * one-MAC, 1 MHz accelerator (9.472 ms per inference, compute-bound).
 */
export function fixture(patch: Patch = {}): ValidationInput {
  const dc = patch.deviceClass ?? {};
  const deviceClass = deviceClassSchema.parse({
    id: 'bench-rig',
    name: 'Test rig',
    lens: { focalLengthMm: 10, fNumberStops: [2, 2.8, 4, 5.6, 8, 11, 16], nearestFocusM: 0.1, focusSettleMsPerDioptre: 0, ...dc.lens },
    sensor: {
      widthPx: 1000, heightPx: 800, pixelPitchUm: 5, quantumEfficiency: 0.5, fullWellE: 20000, darkNoiseE: 2,
      gainDnPerE: 1, bitDepth: 16, maxAnalogGain: 16, readoutMsPerFrame: 5, readoutEnergyPjPerPixel: 10, designWavelengthNm: 550, ...dc.sensor,
    },
    isp: { latencyMsPerFrame: 2, energyPjPerPixel: 5, ...dc.isp },
    accelerator: {
      macUnits: 1, clockMhz: 1, precision: 'int8', sramKib: 64, dramBandwidthGbPerS: 1, energyPjPerMac: 1000,
      energyPjPerSramByte: 0, energyPjPerDramByte: 0, staticPowerMw: 0, flashReadMbPerS: 10, ...dc.accelerator,
    },
    platform: { powerBudgetW: 1, ...dc.platform },
  });
  const network = networkSchema.parse({
    id: 'tiny-net',
    name: 'Tiny test network',
    input: { channels: 3, height: 8, width: 8 },
    // conv: 3·3·3·4 weights × 8·8 outputs = 6,912 MACs; fc: 256 → 10 = 2,560 MACs (Howard et al. 2017 counting).
    layers: [
      { id: 'conv', op: 'conv', out: 4, kernel: 3 },
      { id: 'fc', op: 'fc', out: 10, bias: false },
    ],
    ...patch.network,
  });
  const model = modelSchema.parse({
    id: 'tiny-model', name: 'Tiny model', version: '1', sha256: 'a'.repeat(64), sizeBytes: 1,
    inputWidthPx: 250, inputHeightPx: 200, networkId: 'tiny-net', precision: 'int8',
    ...patch.model,
  });
  const task = taskSchema.parse({
    id: 'test-task', name: 'Test task',
    nearDistanceM: 0.9, farDistanceM: 1.1, featureSizeMm: 10, pixelsPerFeatureMin: 2, maxRelativeSpeedMPerS: 0,
    luminanceMinCdM2: 100, luminanceMaxCdM2: 5000, frameRateHz: 30, minAccuracy: 0.9,
    latencyBudgetMs: 20, energyBudgetMjPerFrame: 0.03, minSnrDb: 20,
    ...patch.task,
  });
  const p = patch.profile ?? {};
  const profile = profileSchema.parse({
    id: 'test-profile', taskId: 'test-task', deviceClassId: 'bench-rig', modelId: 'tiny-model',
    ...p,
    camera: { focusDistanceM: 1, fNumber: 4, exposureUs: 1000, analogGain: 1, ...p.camera },
    memory: { weightBufferKib: 16, activationBufferKib: 16, ...p.memory },
  });
  return { profile, task, deviceClass, model, network };
}

export function checkOf(report: { checks: { code: string }[] }, code: string) {
  const found = report.checks.find((c) => c.code === code);
  if (!found) throw new Error(`no ${code} check in the report`);
  return found as import('../../src/schema/index.js').Check;
}
