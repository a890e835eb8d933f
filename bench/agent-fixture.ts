// Demo data for the agent bench: an invented greenhouse row camera and two tasks with small weights files.
import { createHash } from 'node:crypto';
import type { ReleaseTask } from '../src/protocol/index.js';
import type { DeviceClass } from '../src/schema/device-class.js';

export const benchDeviceClass: DeviceClass = {
  id: 'bench-rowcam',
  name: 'Bench row camera (demo data)',
  demoData: true,
  lens: { focalLengthMm: 6, fNumberStops: [1.8, 2.8, 4, 5.6, 8], nearestFocusM: 0.1, focusSettleMsPerDioptre: 4, apertureStepMs: 10 },
  sensor: {
    widthPx: 1920, heightPx: 1080, pixelPitchUm: 3, quantumEfficiency: 0.6, fullWellE: 10000, darkNoiseE: 3,
    gainDnPerE: 0.4, bitDepth: 10, maxAnalogGain: 16, readoutMsPerFrame: 8, readoutEnergyPjPerPixel: 50, designWavelengthNm: 550,
  },
  isp: { latencyMsPerFrame: 2, energyPjPerPixel: 20 },
  accelerator: {
    macUnits: 1024, clockMhz: 800, precision: 'int8', sramKib: 2048, dramBandwidthGbPerS: 12,
    energyPjPerMac: 0.3, energyPjPerSramByte: 1, energyPjPerDramByte: 40, staticPowerMw: 300, flashReadMbPerS: 100,
  },
  platform: { powerBudgetW: 10 },
};

/** A task whose weights (64 KiB of deterministic bytes) are registered in `files` under its download path. */
export function benchTask(modelId: string, files: Map<string, Buffer>, focusDistanceM: number, fNumber: number): ReleaseTask {
  const bytes = Buffer.alloc(64 * 1024, modelId);
  const weightsPath = `/api/v1/models/${modelId}/weights`;
  files.set(weightsPath, bytes);
  return {
    profileId: `${modelId}-profile`,
    revision: 1,
    camera: { focusDistanceM, fNumber, exposureUs: 2000, analogGain: 2 },
    memory: { weightBufferKib: modelId.length * 100, activationBufferKib: 512 },
    model: { id: modelId, version: '1', sha256: createHash('sha256').update(bytes).digest('hex'), sizeBytes: bytes.length, weightsPath },
    frameRateHz: 10,
    predicted: { inferenceMs: 12, inferenceMj: 30, frameLatencyMs: 25, frameEnergyMj: 45 },
  };
}
