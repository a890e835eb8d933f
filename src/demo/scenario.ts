/**
 * The demo's scenario (demo data): an invented greenhouse with two robot classes, the tasks they switch
 * between, and the revised profile that part of the fleet receives in a staged rollout.
 */
import { fileURLToPath } from 'node:url';
import type { RolloutRequestInput } from '../fleet/rollout/spec.js';

/** The example documents, models and stand-in weights. */
export const DEMO_CATALOG_DIR = fileURLToPath(new URL('../../profiles/greenhouse-demo', import.meta.url));

export const DEMO_CAUTION =
  'Caution: this is a simulation with demo data. Changing perception settings on robots in operation can hide obstacles: ' +
  'on real robots, try a release on one unit first, roll out in stages, apply only in safe states, and follow the site\'s ' +
  'risk assessment, robot safety standards and local regulations.';

/** The release tasks every robot works through, in the order a release lists them. */
export const DEMO_TASKS = ['row-navigation', 'fruit-counting', 'leaf-inspection', 'low-light-patrol'] as const;

export interface DemoClass {
  deviceClassId: string;
  /** Prefix of the robots' ids (gh-a-01, ...). */
  robotPrefix: string;
  /** Profile id per task. */
  profiles: Record<(typeof DEMO_TASKS)[number], string>;
}

export const DEMO_CLASSES: readonly DemoClass[] = [
  {
    deviceClassId: 'gh-scout-a',
    robotPrefix: 'gh-a',
    profiles: { 'row-navigation': 'row-navigation-a', 'fruit-counting': 'fruit-counting-a', 'leaf-inspection': 'leaf-inspection-a', 'low-light-patrol': 'low-light-patrol-a' },
  },
  {
    deviceClassId: 'gh-scout-b',
    robotPrefix: 'gh-b',
    profiles: { 'row-navigation': 'row-navigation-b', 'fruit-counting': 'fruit-counting-b', 'leaf-inspection': 'leaf-inspection-b', 'low-light-patrol': 'low-light-patrol-b' },
  },
];

/**
 * The improvement rolled out during the demo (demo data): fruit counting on scout A under the red/blue grow
 * lights with a longer exposure (566 → 800 µs): the dark-corner SNR rises by about 2 dB while the brightest
 * fruit stays below 90 % of saturation and motion blur within the model's tolerance. The validator passes it.
 */
export const REVISED_PROFILE = {
  deviceClassId: 'gh-scout-a',
  task: 'fruit-counting',
  profileId: 'fruit-counting-a',
  camera: { focusDistanceM: 0.48, exposureUs: 800 },
  notes:
    'Demo data, revision for the demo rollout: exposure 800 µs instead of 566 µs for more signal in the dark corners under the grow lights; ' +
    'the brightest fruit stays below 90 % of saturation.',
} as const;

/**
 * The staged rollout of the revised release: one canary robot, then half of the rest, then the others.
 * The gate is short because the demo compresses time: each robot must apply the release within a minute
 * and report 30 telemetry frames whose mean inference time is within ±25 % of the calibrated prediction.
 */
export function demoRolloutRequest(releaseId: string, deviceIds: readonly string[]): RolloutRequestInput {
  return {
    releaseId,
    target: { deviceIds: [...deviceIds] },
    waves: [1, '50%'],
    gate: { applyTimeoutS: 60, telemetryFrames: 30, telemetryTimeoutS: 60, latencyTolerance: 0.25 },
    offline: { waitS: 30, then: 'fail' },
    note: 'demo data: revised fruit-counting profile for scout A (longer exposure under the grow lights)',
  };
}
