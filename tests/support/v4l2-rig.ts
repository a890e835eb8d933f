/**
 * The v4l2-ctl stand-in on PATH (tests/support/v4l2-standin/), with cameras described by the recorded
 * control lists in tests/fixtures/v4l2/, and a demo device class with calibration tables for them.
 */
import { existsSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { DeviceClass } from '../../src/schema/device-class.js';
import { demoDeviceClass } from './agent-fixtures.js';

const ROOT = new URL('../..', import.meta.url).pathname;
export const STANDIN_BIN = join(ROOT, 'tests/support/v4l2-standin');
export const FIXTURES = join(ROOT, 'tests/fixtures/v4l2');

export interface StandinCamera {
  fixture: 'uvc-rowcam' | 'uvc-fixedfocus';
  frameRates?: number[];
  refuse?: string[];
}

export interface V4l2Standin {
  dir: string;
  /** PATH with the stand-in first, and the variable that points it at `dir`. */
  env: NodeJS.ProcessEnv;
  setCameras(cameras: Record<string, StandinCamera>): void;
  /** The control values the camera holds now. */
  values(device: string): Record<string, number>;
  fps(device: string): number;
  /** Power-cycles a camera: its controls go back to the recorded values. */
  powerCycle(device: string): void;
  calls(): string[][];
}

export function v4l2Standin(dir: string): V4l2Standin {
  const statePath = (device: string) => join(dir, `${device.replace(/[^a-zA-Z0-9]/g, '_')}.state.json`);
  const state = (device: string) => JSON.parse(readFileSync(statePath(device), 'utf8')) as { controls: Array<{ name: string; value: number }>; fps: number };
  return {
    dir,
    env: { ...process.env, PATH: `${STANDIN_BIN}:${process.env.PATH}`, V4L2_STANDIN_DIR: dir },
    setCameras(cameras) {
      const doc = Object.fromEntries(Object.entries(cameras).map(([dev, c]) => [dev, { ...c, fixture: join(FIXTURES, `${c.fixture}.list-ctrls-menus.txt`) }]));
      writeFileSync(join(dir, 'devices.json'), JSON.stringify(doc));
    },
    values: (device) => Object.fromEntries(state(device).controls.map((c) => [c.name, c.value])),
    fps: (device) => state(device).fps,
    powerCycle: (device) => {
      if (existsSync(statePath(device))) rmSync(statePath(device));
    },
    calls: () => (existsSync(join(dir, 'calls.log')) ? readFileSync(join(dir, 'calls.log'), 'utf8').split('\n').filter(Boolean).map((l) => JSON.parse(l) as string[]) : []),
  };
}

/**
 * Demo data: the row camera's calibration, as an integrator would measure it (device-agent/README.md,
 * "Calibrating the focus table"). Invented but plausible for a UVC webcam whose focus_absolute runs 0
 * (infinity) to 250 (about 0.1 m, its nearest focus) in steps of 5, and whose gain code 0-255 spans
 * about 1× to 16× (orders of magnitude from memory of UVC webcams).
 */
export const calibratedRowcam: DeviceClass = {
  ...demoDeviceClass,
  id: 'gh-rowcam-v4l2',
  name: 'Greenhouse row camera, UVC module (demo data)',
  lens: { ...demoDeviceClass.lens, fNumberStops: [2.8] },
  controls: {
    focus: { unit: 'dioptre', points: [{ at: 0, code: 0 }, { at: 2, code: 50 }, { at: 5, code: 125 }, { at: 10, code: 250 }] },
    gain: { points: [{ at: 1, code: 0 }, { at: 4, code: 128 }, { at: 16, code: 255 }] },
  },
};
