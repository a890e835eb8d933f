// Demo data for the agent bench: an invented greenhouse row camera and two tasks with small weights files.
import { createHash } from 'node:crypto';
import type { ReleaseTask } from '../src/protocol/index.js';
import type { DeviceClass } from '../src/schema/device-class.js';
import { demoDeviceClass } from '../tests/support/agent-fixtures.js';
import { calibratedRowcam } from '../tests/support/v4l2-rig.js';

/** The agent tests' demo camera under its own id, so bench devices never mix with test ones. */
export const benchDeviceClass: DeviceClass = { ...demoDeviceClass, id: 'bench-rowcam', name: 'Bench row camera (demo data)' };

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

/** The tests' calibrated UVC row camera (focus and gain tables) under a bench id, for the V4L2 driver. */
export const benchV4l2DeviceClass: DeviceClass = { ...calibratedRowcam, id: 'bench-rowcam-v4l2', name: 'Bench UVC row camera (demo data)' };
