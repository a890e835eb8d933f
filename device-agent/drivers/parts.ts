import type { Release } from '../../src/protocol/release.js';
import type { CameraSettings, MemoryPartition } from '../../src/schema/profile.js';
import type { ProfileDriver, ProfileTarget } from '../driver.js';
import type { ToolRunner } from './run-tool.js';

/** The camera half of a real driver (V4L2, libcamera-style, command). */
export interface CameraPart {
  readonly name: string;
  /** Reads what the camera offers; throws with the reason when the camera cannot be reached. */
  start?(): Promise<void>;
  /** Why this camera cannot run the release, or null. */
  checkRelease?(release: Release): string | null;
  applyCamera(settings: CameraSettings, target: ProfileTarget): Promise<void>;
}

/** The accelerator half: memory partition and weights (a command, or left to the robot's own inference process). */
export interface AcceleratorPart {
  readonly name: string;
  setMemoryPartition(partition: MemoryPartition, target: ProfileTarget): Promise<void>;
  loadWeights(path: string, sha256: string, target: ProfileTarget): Promise<void>;
}

/**
 * For robots whose inference process loads weights on its own: the agent verifies and keeps the
 * weights file (its path is in the task-switched state) but runs nothing for these steps.
 */
export function acceleratorLeftToRobot(log: (line: string) => void): AcceleratorPart {
  let told = false;
  const tell = () => {
    if (!told) log('agent: no weightsCommand/memoryCommand configured: the memory partition and weights steps run nothing on this robot');
    told = true;
  };
  return {
    name: 'none',
    setMemoryPartition: async function setMemoryPartition() {
      tell();
    },
    loadWeights: async function loadWeights() {
      tell();
    },
  };
}

/** One ProfileDriver from a camera part and an accelerator part sharing one tool runner. */
export function composeDriver(camera: CameraPart, accelerator: AcceleratorPart, tools: ToolRunner): ProfileDriver {
  return {
    name: `${camera.name} + accelerator ${accelerator.name}`,
    ...(camera.start ? { start: () => camera.start!() } : {}),
    ...(camera.checkRelease ? { checkRelease: (r: Release) => camera.checkRelease!(r) } : {}),
    setMemoryPartition: (p, t) => accelerator.setMemoryPartition(p, t),
    loadWeights: (path, sha, t) => accelerator.loadWeights(path, sha, t),
    applyCamera: (s, t) => camera.applyCamera(s, t),
    // Real drivers measure nothing about inference themselves; the robot's inference process reports it.
    readTelemetry: () => null,
    toolMs: () => tools.toolMs(),
  };
}
