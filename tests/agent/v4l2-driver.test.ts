import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { systemClock } from '../../device-agent/clock.js';
import type { ProfileDriver, ProfileTarget } from '../../device-agent/driver.js';
import { acceleratorLeftToRobot, composeDriver } from '../../device-agent/drivers/parts.js';
import { createToolRunner } from '../../device-agent/drivers/run-tool.js';
import { createV4l2Camera } from '../../device-agent/drivers/v4l2-camera.js';
import { parseControlList, parseFrameRate, parseGetControls } from '../../device-agent/drivers/v4l2-ctl-output.js';
import { switchProfile } from '../../device-agent/switcher.js';
import type { ReleaseTask } from '../../src/protocol/index.js';
import type { DeviceClass } from '../../src/schema/device-class.js';
import { demoRelease, demoTask, demoWeights, tempDir } from '../support/agent-fixtures.js';
import { FIXTURES, calibratedRowcam, v4l2Standin, type V4l2Standin } from '../support/v4l2-rig.js';

const rowsTask: ReleaseTask = { ...demoTask('rows-net', demoWeights('rows v4l2'), 0.5, 2.8), frameRateHz: 10 };
const leavesTask: ReleaseTask = {
  ...demoTask('leaf-net', demoWeights('leaves v4l2'), 0.25, 2.8),
  camera: { focusDistanceM: 0.25, fNumber: 2.8, exposureUs: 4000, analogGain: 4 },
  frameRateHz: 15,
};

const dir = tempDir('v4l2');
let standin: V4l2Standin;

beforeAll(() => {
  standin = v4l2Standin(dir.path);
  // The driver finds v4l2-ctl on PATH, as on a robot; here the stand-in comes first.
  process.env.PATH = standin.env.PATH;
  process.env.V4L2_STANDIN_DIR = dir.path;
});
afterAll(() => dir.remove());

function target(task: ReleaseTask, taskName: string, deviceClass: DeviceClass = calibratedRowcam): ProfileTarget {
  return { releaseId: 'rel-v4l2', taskName, task, deviceClass, weightsPath: '/nonexistent' };
}

async function driverFor(device: string): Promise<ProfileDriver> {
  const tools = createToolRunner();
  const camera = createV4l2Camera({ tools, device, program: 'v4l2-ctl', gainControl: 'auto', tolerancePct: 2, timeoutMs: 10_000 });
  const driver = composeDriver(camera, acceleratorLeftToRobot(() => {}), tools);
  await driver.start!();
  return driver;
}

describe('reading v4l2-ctl output', () => {
  const list = parseControlList(readFileSync(join(FIXTURES, 'uvc-rowcam.list-ctrls-menus.txt'), 'utf8'));

  it('reads ranges, steps, defaults, flags and menus from a recorded --list-ctrls-menus', () => {
    expect(list.get('exposure_time_absolute')).toEqual({
      name: 'exposure_time_absolute', type: 'int', min: 3, max: 2047, step: 1, defaultValue: 250, value: 250, flags: ['inactive'], menu: [],
    });
    expect(list.get('focus_absolute')).toMatchObject({ min: 0, max: 250, step: 5, flags: ['inactive'] });
    // Menu lines follow their control; value=3 "(Aperture Priority Mode)" keeps only the number.
    expect(list.get('auto_exposure')).toMatchObject({ type: 'menu', value: 3, menu: [{ index: 1, name: 'Manual Mode' }, { index: 3, name: 'Aperture Priority Mode' }] });
    expect(list.get('focus_automatic_continuous')).toMatchObject({ type: 'bool', min: 0, max: 1, value: 1, flags: [] });
    expect(list.size).toBe(13);
  });

  it('reads --get-ctrl and frame-rate answers, and nothing from unrelated text', () => {
    expect([...parseGetControls('gain: 12\nfocus_absolute: -5\nnoise\n')]).toEqual([['gain', 12], ['focus_absolute', -5]]);
    expect(parseFrameRate('Streaming Parameters Video Capture:\n\tCapabilities     : timeperframe\n\tFrames per second: 15.000 (15/1)\n')).toEqual({ fps: 15, settable: true });
    expect(parseFrameRate('Frame rate set to 30.000 fps\n')).toEqual({ fps: 30, settable: true });
    expect(parseFrameRate('nothing here')).toBeNull();
  });
});

describe('V4L2 driver against the v4l2-ctl stand-in', () => {
  it('a full task switch sets every control, in manual modes, and reads each back', async () => {
    standin.setCameras({ '/dev/video0': { fixture: 'uvc-rowcam', frameRates: [5, 10, 15, 30] } });
    const driver = await driverFor('/dev/video0');
    const first = await switchProfile(driver, null, target(rowsTask, 'rows'), systemClock);
    expect(first).toMatchObject({ ok: true, stepsRun: ['setMemoryPartition', 'loadWeights', 'applyCamera'] });
    // rows: 2000 µs = 20 units of 100 µs; gain 2× between (1×, 0) and (4×, 128) = 43; 0.5 m = 2 D → 50.
    expect(standin.values('/dev/video0')).toMatchObject({ auto_exposure: 1, focus_automatic_continuous: 0, exposure_time_absolute: 20, gain: 43, focus_absolute: 50 });
    expect(standin.fps('/dev/video0')).toBe(10);

    const calls = standin.calls();
    const before = calls.length;
    const second = await switchProfile(driver, target(rowsTask, 'rows'), target(leavesTask, 'leaves'), systemClock);
    expect(second).toMatchObject({ ok: true, stepsRun: ['loadWeights', 'applyCamera'] });
    // leaves: 4000 µs = 40; gain 4× = 128; 0.25 m = 4 D → 50 + (2/3)·75 = 100.
    expect(standin.values('/dev/video0')).toMatchObject({ exposure_time_absolute: 40, gain: 128, focus_absolute: 100 });
    expect(standin.fps('/dev/video0')).toBe(15);
    // Modes are already manual: the switch is the frame rate, then one write that reads its values back.
    expect(standin.calls().slice(before)).toEqual([
      ['-d', '/dev/video0', '--set-parm=15'],
      ['-d', '/dev/video0', '--set-ctrl=exposure_time_absolute=40,gain=128,focus_absolute=100', '--get-ctrl=exposure_time_absolute,gain,focus_absolute'],
    ]);
    expect(second.ok && second.toolMs).toBeGreaterThan(0);
  });

  it('an exposure the camera clamps fails the step and the previous settings come back', async () => {
    standin.setCameras({ '/dev/video1': { fixture: 'uvc-rowcam', frameRates: [5, 10, 15, 30] } });
    const driver = await driverFor('/dev/video1');
    expect((await switchProfile(driver, null, target(rowsTask, 'rows'), systemClock)).ok).toBe(true);
    // 150 ms at 15 fps: the frame period is 66.7 ms, so the camera holds exposure at 666 units.
    const long: ReleaseTask = { ...leavesTask, camera: { ...leavesTask.camera, exposureUs: 150_000 } };
    const outcome = await switchProfile(driver, target(rowsTask, 'rows'), target(long, 'leaves'), systemClock);
    expect(outcome).toMatchObject({ ok: false, step: 'applyCamera', restored: true });
    expect(!outcome.ok && outcome.error).toMatch(/exposure_time_absolute reads 666 after writing 1500 \(exposure 150000 µs\), beyond the tolerance/);
    expect(standin.values('/dev/video1')).toMatchObject({ exposure_time_absolute: 20, gain: 43, focus_absolute: 50 });
    expect(standin.fps('/dev/video1')).toBe(10);
  });

  it('a write the camera refuses fails the step with the tool\'s own error', async () => {
    standin.setCameras({ '/dev/video2': { fixture: 'uvc-rowcam', frameRates: [10, 30], refuse: ['gain'] } });
    const driver = await driverFor('/dev/video2');
    const outcome = await switchProfile(driver, null, target(rowsTask, 'rows'), systemClock);
    expect(outcome).toMatchObject({ ok: false, step: 'applyCamera', restored: false });
    expect(!outcome.ok && outcome.error).toMatch(/v4l2 \/dev\/video2: setting task rows .* failed: v4l2-ctl exited with code 255: VIDIOC_S_EXT_CTRLS: failed: Input\/output error/);
  });

  it('a release that needs a control the camera lacks is refused with the reason, before anything moves', async () => {
    standin.setCameras({ '/dev/video3': { fixture: 'uvc-fixedfocus' } });
    const driver = await driverFor('/dev/video3');
    const release = demoRelease('rel-ff', 1, { rows: rowsTask }, { deviceClass: calibratedRowcam, deviceClassId: calibratedRowcam.id, audience: { deviceClassId: calibratedRowcam.id } });
    expect(driver.checkRelease!(release)).toMatch(/^task rows: needs the V4L2 control focus_absolute \(focus 0.5 m; the device class has a focus table\), which this camera does not offer; it has: brightness,/);
    // Only the control list and the frame rate were read from this camera: nothing was written.
    expect(standin.calls().filter((c) => c[1] === '/dev/video3')).toEqual([['-d', '/dev/video3', '--list-ctrls-menus'], ['-d', '/dev/video3', '--get-parm']]);
  });

  it('a release outside the focus calibration, or asking a fixed iris for two f-numbers, is refused', async () => {
    standin.setCameras({ '/dev/video4': { fixture: 'uvc-rowcam' } });
    const driver = await driverFor('/dev/video4');
    const tooNear: ReleaseTask = { ...rowsTask, camera: { ...rowsTask.camera, focusDistanceM: 0.05 } };
    expect(driver.checkRelease!(demoRelease('r1', 1, { near: tooNear }, { deviceClass: calibratedRowcam }))).toBe(
      'task near: focus 0.05 m (20 dioptres) is outside the calibrated range 0 to 10 dioptres (controls.focus)',
    );
    const wide: ReleaseTask = { ...rowsTask, camera: { ...rowsTask.camera, fNumber: 4 } };
    expect(driver.checkRelease!(demoRelease('r2', 1, { rows: rowsTask, wide }, { deviceClass: calibratedRowcam }))).toMatch(/f-numbers f\/2.8, f\/4 but device class gh-rowcam-v4l2 has no iris table/);
    const noGainTable: DeviceClass = { ...calibratedRowcam, controls: { focus: calibratedRowcam.controls!.focus! } };
    expect(driver.checkRelease!(demoRelease('r3', 1, { rows: rowsTask }, { deviceClass: noGainTable }))).toMatch(/no gain calibration table \(controls.gain\)/);
    expect(driver.checkRelease!(demoRelease('r4', 1, { rows: rowsTask, leaves: leavesTask }, { deviceClass: calibratedRowcam }))).toBeNull();
  });

  it('a camera that cannot be opened stops the driver\'s start with the tool\'s message', async () => {
    standin.setCameras({});
    const tools = createToolRunner();
    const camera = createV4l2Camera({ tools, device: '/dev/video9', program: 'v4l2-ctl', gainControl: 'auto', tolerancePct: 2, timeoutMs: 10_000 });
    await expect(camera.start!()).rejects.toThrow('v4l2 /dev/video9: reading the control list failed: v4l2-ctl exited with code 1: Cannot open device /dev/video9, exiting.');
  });
});
