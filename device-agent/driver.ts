import type { Release, ReleaseTask } from '../src/protocol/release.js';
import type { DeviceClass } from '../src/schema/device-class.js';
import type { CameraSettings, MemoryPartition } from '../src/schema/profile.js';

/**
 * The profile a driver is asked to run, with the context a driver may need: the task's settings,
 * the device-class snapshot the release was validated against, and the verified local weights file.
 */
export interface ProfileTarget {
  releaseId: string;
  taskName: string;
  task: ReleaseTask;
  deviceClass: DeviceClass;
  /** Absolute path of the weights file, already checked against task.model.sha256. */
  weightsPath: string;
}

/** The steps of a switch, in the order the agent runs them. */
export const DRIVER_STEPS = ['setMemoryPartition', 'loadWeights', 'applyCamera'] as const;
export type DriverStep = (typeof DRIVER_STEPS)[number];

/** What the device measured while a profile ran, since the previous reading. */
export interface TelemetrySample {
  frames: number;
  windowS: number;
  inferenceMsMean: number;
  inferenceMjMean: number;
  frameEnergyMjMean: number;
}

/**
 * How the agent drives the camera and the accelerator. To wire in real hardware, implement these
 * four calls and pass the object to createAgent:
 *
 * - `setMemoryPartition(partition)` splits the accelerator's on-chip memory into the weight and
 *   activation buffers (KiB) before weights are loaded.
 * - `loadWeights(path, sha256)` loads the network from a local file the agent has verified.
 * - `applyCamera(settings)` moves focus (focusDistanceM) and aperture (fNumber) and sets exposure
 *   (exposureUs) and analog gain; it resolves once the lens has settled.
 * - `readTelemetry()` returns frame count, mean inference time and energy since the last call, or
 *   null while nothing runs.
 *
 * Each call either completes or throws. The agent measures the time spent inside these calls as
 * actuation time and, when one throws, calls them again with the previous profile's values to put
 * the device back; so a call must accept being asked for settings it already has. Calls never
 * overlap: the agent runs one at a time.
 */
export interface ProfileDriver {
  readonly name: string;
  setMemoryPartition(partition: MemoryPartition, target: ProfileTarget): Promise<void>;
  loadWeights(path: string, sha256: string, target: ProfileTarget): Promise<void>;
  applyCamera(settings: CameraSettings, target: ProfileTarget): Promise<void>;
  readTelemetry(): TelemetrySample | null;
  /** Reads what the hardware offers before anything is applied (a camera's control list); throws when it cannot. */
  start?(): Promise<void>;
  /** Why this device cannot run the release (a control it lacks, a setting outside its calibration), or null. */
  checkRelease?(release: Release): string | null;
  /** Milliseconds spent so far waiting for external tools (v4l2-ctl, commands), to tell them from the agent's own time. */
  toolMs?(): number;
  close?(): Promise<void>;
}
