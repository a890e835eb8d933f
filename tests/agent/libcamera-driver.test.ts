import { spawn, type ChildProcess } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { systemClock } from '../../device-agent/clock.js';
import type { ProfileTarget } from '../../device-agent/driver.js';
import { LIBCAMERA_HANDOFF_FORMAT, createLibcameraCamera } from '../../device-agent/drivers/libcamera-camera.js';
import { acceleratorLeftToRobot, composeDriver } from '../../device-agent/drivers/parts.js';
import { createToolRunner } from '../../device-agent/drivers/run-tool.js';
import { switchProfile } from '../../device-agent/switcher.js';
import type { ReleaseTask } from '../../src/protocol/index.js';
import { demoDeviceClass, demoTask, demoWeights, tempDir } from '../support/agent-fixtures.js';

const STANDIN = new URL('../support/libcamera-standin.mjs', import.meta.url).pathname;
const dir = tempDir('libcamera');
const children: ChildProcess[] = [];
afterAll(() => {
  for (const c of children) c.kill('SIGKILL');
  dir.remove();
});

const rows: ReleaseTask = demoTask('rows-net', demoWeights('rows lc'), 0.5, 4);
const leaves: ReleaseTask = { ...demoTask('leaf-net', demoWeights('leaves lc'), 0.25, 2.8), camera: { focusDistanceM: 0.25, fNumber: 2.8, exposureUs: 8000, analogGain: 6 } };
const target = (task: ReleaseTask, taskName: string): ProfileTarget => ({ releaseId: 'rel-lc', taskName, task, deviceClass: demoDeviceClass, weightsPath: '/x' });

async function cameraProcess(label: string, maxGain: number) {
  const controlsFile = join(dir.path, `${label}-controls.json`);
  const appliedFile = join(dir.path, `${label}-applied.json`);
  const child = spawn(process.execPath, [STANDIN, controlsFile, appliedFile, String(maxGain)], { stdio: ['ignore', 'pipe', 'inherit'] });
  children.push(child);
  await new Promise<void>((resolve) => child.stdout!.once('data', () => resolve()));
  const tools = createToolRunner();
  const driver = composeDriver(createLibcameraCamera({ controlsFile, appliedFile, tolerancePct: 2, timeoutMs: 5000, pollMs: 2 }), acceleratorLeftToRobot(() => {}), tools);
  return { controlsFile, driver };
}

describe('libcamera-style driver with a camera process on the hand-off files', () => {
  it('writes libcamera controls in their own units and waits for the camera to report them applied', async () => {
    const cam = await cameraProcess('ok', 16);
    expect((await switchProfile(cam.driver, null, target(rows, 'rows'), systemClock)).ok).toBe(true);
    const doc = JSON.parse(readFileSync(cam.controlsFile, 'utf8'));
    // 0.5 m = 2 dioptres; 2000 µs; 10 fps = 100,000 µs frame duration (libcamera control_ids_core.yaml units).
    expect(doc).toMatchObject({
      format: LIBCAMERA_HANDOFF_FORMAT, task: 'rows', releaseId: 'rel-lc', fNumber: 4,
      controls: { AfMode: 0, LensPosition: 2, AeEnable: false, ExposureTime: 2000, AnalogueGain: 2, FrameDurationLimits: [100_000, 100_000] },
    });
    expect((await switchProfile(cam.driver, target(rows, 'rows'), target(leaves, 'leaves'), systemClock)).ok).toBe(true);
    expect(JSON.parse(readFileSync(cam.controlsFile, 'utf8')).controls).toMatchObject({ LensPosition: 4, ExposureTime: 8000, AnalogueGain: 6 });
  });

  it('a gain the camera clamps fails the step and the previous controls are written again', async () => {
    const cam = await cameraProcess('clamp', 4);
    expect((await switchProfile(cam.driver, null, target(rows, 'rows'), systemClock)).ok).toBe(true);
    const outcome = await switchProfile(cam.driver, target(rows, 'rows'), target(leaves, 'leaves'), systemClock);
    expect(outcome).toMatchObject({ ok: false, step: 'applyCamera', restored: true });
    expect(!outcome.ok && outcome.error).toBe('libcamera: the camera did not take the controls (tolerance 2 %): AnalogueGain is 4, asked 6');
    expect(JSON.parse(readFileSync(cam.controlsFile, 'utf8'))).toMatchObject({ task: 'rows', controls: { AnalogueGain: 2, LensPosition: 2 } });
  });

  it('without a camera process the step fails after the time limit, naming the file it waited on', async () => {
    const applied = join(dir.path, 'nobody-applied.json');
    const camera = createLibcameraCamera({ controlsFile: join(dir.path, 'nobody-controls.json'), appliedFile: applied, tolerancePct: 2, timeoutMs: 200, pollMs: 2 });
    await expect(camera.applyCamera(rows.camera, target(rows, 'rows'))).rejects.toThrow(/^libcamera: no metadata for controls seq \d+ in .*nobody-applied.json within 200 ms; is the camera process running\?$/);
  });
});
