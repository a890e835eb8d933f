/**
 * SIMULATION. A stand-in for a camera and an accelerator, so the agent can run on an ordinary
 * machine: it moves nothing and runs no network. Actuation times follow sim-physics.ts scaled by
 * `timeScale` (0 makes every step instant, for tests); telemetry is drawn around the release's
 * predicted inference time and energy times a hidden per-device `efficiency`, with ±2 % noise.
 */
import type { CameraSettings, MemoryPartition } from '../src/schema/profile.js';
import type { AgentClock } from './clock.js';
import type { DriverStep, ProfileDriver, ProfileTarget, TelemetrySample } from './driver.js';
import { apertureTravelMs, focusTravelMs, weightsLoadMs } from './sim-physics.js';

export interface SimDriverOptions {
  clock: AgentClock;
  /** Multiplies every simulated actuation time; 0 = instant. */
  timeScale?: number;
  /** This unit's hidden efficiency: measured inference time and energy = predicted × efficiency. */
  efficiency?: number;
  /** Seed of the noise, so runs can be repeated. */
  seed?: number;
  /** Failure injection for tests: this step throws when switching to `failTask` (or to any task when absent). */
  failStep?: DriverStep;
  failTask?: string;
}

/** What the simulated hardware currently holds. */
export interface SimHardware {
  camera: CameraSettings | null;
  memory: MemoryPartition | null;
  weightsSha256: string | null;
  taskName: string | null;
}

export interface SimDriver extends ProfileDriver {
  hardware(): SimHardware;
  /** Simulated milliseconds of actuation so far, before scaling. */
  simulatedActuationMs(): number;
}

// mulberry32: a small seeded generator (common practice for reproducible simulations).
export function seededRandom(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function createSimDriver(options: SimDriverOptions): SimDriver {
  const timeScale = options.timeScale ?? 1;
  const efficiency = options.efficiency ?? 1;
  const random = seededRandom(options.seed ?? 1);
  const hw: SimHardware = { camera: null, memory: null, weightsSha256: null, taskName: null };
  let running: ProfileTarget | null = null;
  let windowStartMs = options.clock.monotonicMs();
  let simulatedMs = 0;

  async function actuate(step: DriverStep, target: ProfileTarget, ms: number): Promise<void> {
    if (options.failStep === step && (options.failTask === undefined || options.failTask === target.taskName)) {
      throw new Error(`simulated failure of ${step} (sim driver failure injection)`);
    }
    simulatedMs += ms;
    const wait = ms * timeScale;
    if (wait > 0) await new Promise((resolve) => setTimeout(resolve, wait));
  }

  // Telemetry describes the profile of the last completed step; a new profile starts a new window.
  function runs(target: ProfileTarget) {
    if (running?.taskName !== target.taskName || running.releaseId !== target.releaseId) windowStartMs = options.clock.monotonicMs();
    running = target;
    hw.taskName = target.taskName;
  }

  // Noise with a standard deviation of 2 %, Box–Muller transform of two uniform draws.
  function noisy(value: number): number {
    const g = Math.sqrt(-2 * Math.log(1 - random())) * Math.cos(2 * Math.PI * random());
    return Math.max(0, value * efficiency * (1 + 0.02 * g));
  }

  return {
    name: 'sim (simulated camera and accelerator)',
    setMemoryPartition: async function setMemoryPartition(partition, target) {
      await actuate('setMemoryPartition', target, 0);
      hw.memory = { ...partition };
      runs(target);
    },
    loadWeights: async function loadWeights(_path, sha256, target) {
      await actuate('loadWeights', target, weightsLoadMs(target.task.model.sizeBytes, target.deviceClass.accelerator.flashReadMbPerS));
      hw.weightsSha256 = sha256;
      runs(target);
    },
    applyCamera: async function applyCamera(settings, target) {
      const lens = target.deviceClass.lens;
      const ms =
        focusTravelMs(hw.camera?.focusDistanceM ?? null, settings.focusDistanceM, lens.focusSettleMsPerDioptre) +
        apertureTravelMs(hw.camera?.fNumber ?? null, settings.fNumber, lens.fNumberStops, lens.apertureStepMs);
      await actuate('applyCamera', target, ms);
      hw.camera = { ...settings };
      runs(target);
    },
    readTelemetry: function readTelemetry(): TelemetrySample | null {
      if (!running) return null;
      const nowMs = options.clock.monotonicMs();
      const windowS = Math.max(0, (nowMs - windowStartMs) / 1000);
      windowStartMs = nowMs;
      const predicted = running.task.predicted;
      return {
        frames: Math.round(windowS * running.task.frameRateHz),
        windowS,
        inferenceMsMean: noisy(predicted.inferenceMs),
        inferenceMjMean: noisy(predicted.inferenceMj),
        frameEnergyMjMean: noisy(predicted.frameEnergyMj),
      };
    },
    hardware: () => ({ ...hw }),
    simulatedActuationMs: () => simulatedMs,
  };
}
