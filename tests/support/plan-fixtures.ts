// Documents for the planner's tests. The numbers are invented test values in the greenhouse-robot
// setting (demo data), small enough that the whole grid can also be run through validate() one by one.
import { deviceClassSchema, modelSchema, networkSchema, taskSchema } from '../../src/schema/index.js';
import type { DeviceClass, Model, Network, Task } from '../../src/schema/index.js';
import type { ModelCandidate } from '../../src/plan/index.js';

export const testNetwork: Network = networkSchema.parse({
  kind: 'network',
  id: 'test-net-96',
  name: 'Test network, 96 px (demo data)',
  demoData: true,
  input: { channels: 3, height: 96, width: 96 },
  layers: [
    { op: 'conv', out: 16, kernel: 3, stride: 2 },
    { op: 'dwconv', kernel: 3 },
    { op: 'conv', out: 32, kernel: 1 },
    { op: 'dwconv', kernel: 3, stride: 2 },
    { op: 'conv', out: 64, kernel: 1 },
    { op: 'avgpool', global: true },
    { op: 'fc', out: 8 },
  ],
});

/** A second network, wider, whose weights do not fit every weight buffer. */
export const wideNetwork: Network = networkSchema.parse({
  kind: 'network',
  id: 'test-net-wide',
  name: 'Wide test network (demo data)',
  demoData: true,
  input: { channels: 3, height: 96, width: 96 },
  layers: [
    { op: 'conv', out: 32, kernel: 3, stride: 2 },
    { op: 'conv', out: 128, kernel: 3, stride: 2 },
    { op: 'conv', out: 256, kernel: 3, stride: 2 },
    { op: 'avgpool', global: true },
    { op: 'fc', out: 16 },
  ],
});

export const testDeviceClass: DeviceClass = deviceClassSchema.parse({
  kind: 'device-class',
  id: 'test-scout',
  name: 'Test scout (demo data)',
  demoData: true,
  lens: { focalLengthMm: 6, fNumberStops: [2, 2.8, 4, 8], nearestFocusM: 0.1, focusSettleMsPerDioptre: 3 },
  sensor: {
    widthPx: 640, heightPx: 480, pixelPitchUm: 3, quantumEfficiency: 0.6, fullWellE: 10000, darkNoiseE: 2.5,
    gainDnPerE: 0.4, bitDepth: 12, maxAnalogGain: 8, readoutMsPerFrame: 5, readoutEnergyPjPerPixel: 35,
  },
  isp: { latencyMsPerFrame: 2, energyPjPerPixel: 25 },
  accelerator: {
    macUnits: 128, clockMhz: 500, precision: 'int8', sramKib: 256, dramBandwidthGbPerS: 2,
    energyPjPerMac: 0.25, energyPjPerSramByte: 1.5, energyPjPerDramByte: 200, staticPowerMw: 100, flashReadMbPerS: 40, powerGated: true,
  },
  platform: { powerBudgetW: 1 },
});

export const testTask: Task = taskSchema.parse({
  kind: 'task',
  id: 'test-fruit',
  name: 'Test fruit counting (demo data)',
  demoData: true,
  nearDistanceM: 0.3,
  farDistanceM: 1.2,
  featureSizeMm: 40,
  pixelsPerFeatureMin: 4,
  maxRelativeSpeedMPerS: 0.2,
  luminanceMinCdM2: 60,
  luminanceMaxCdM2: 3000,
  frameRateHz: 10,
  minAccuracy: 0.8,
  latencyBudgetMs: 60,
  energyBudgetMjPerFrame: 5,
});

const curves = (top: number) => ({
  blurUnit: 'input-px',
  accuracyVsBlur: [
    { blurPx: 0, accuracy: top },
    { blurPx: 0.5, accuracy: top - 0.02 },
    { blurPx: 1.2, accuracy: top - 0.15 },
    { blurPx: 2.4, accuracy: top - 0.4 },
  ],
  accuracyVsSnr: [
    { snrDb: 5, accuracy: 0.4 },
    { snrDb: 15, accuracy: top - 0.1 },
    { snrDb: 30, accuracy: top },
  ],
});

function model(id: string, network: Network, precision: 'int8' | 'fp16', top: number): Model {
  return modelSchema.parse({
    kind: 'model', id, name: `Test model ${id} (demo data)`, version: '1', demoData: true,
    sha256: '0'.repeat(64), sizeBytes: 1024, inputWidthPx: 96, inputHeightPx: 96,
    networkId: network.id, precision, measuredForTaskIds: ['test-fruit', 'test-tight'], ...curves(top),
  });
}

export const smallModel = model('test-small', testNetwork, 'int8', 0.9);
export const wideModel = model('test-wide', wideNetwork, 'int8', 0.95);
export const halfModel = model('test-half', testNetwork, 'fp16', 0.97);

export const testCandidates: ModelCandidate[] = [
  { model: smallModel, network: testNetwork },
  { model: wideModel, network: wideNetwork },
];
