import { readFileSync, writeFileSync, chmodSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { systemClock } from '../../device-agent/clock.js';
import type { ProfileTarget } from '../../device-agent/driver.js';
import { COMMAND_INPUT_FORMAT, createCommandAccelerator, createCommandCamera } from '../../device-agent/drivers/command-driver.js';
import { composeDriver } from '../../device-agent/drivers/parts.js';
import { createToolRunner } from '../../device-agent/drivers/run-tool.js';
import { switchProfile } from '../../device-agent/switcher.js';
import type { ReleaseTask } from '../../src/protocol/index.js';
import { demoDeviceClass, demoTask, demoWeights, tempDir } from '../support/agent-fixtures.js';

const ROOT = new URL('../..', import.meta.url).pathname;
const EXAMPLE = join(ROOT, 'device-agent/examples/driver-step.mjs');
const dir = tempDir('command-driver');
afterAll(() => dir.remove());

const rowsW = demoWeights('rows cmd');
const leavesW = demoWeights('leaves cmd');
writeFileSync(join(dir.path, 'rows.bin'), rowsW.bytes);
writeFileSync(join(dir.path, 'leaves.bin'), leavesW.bytes);
const rows: ReleaseTask = demoTask('rows-net', rowsW, 0.5, 4);
const leaves: ReleaseTask = { ...demoTask('leaf-net', leavesW, 0.25, 2.8), memory: { weightBufferKib: 768, activationBufferKib: 256 } };
const target = (task: ReleaseTask, taskName: string, file: string): ProfileTarget => ({ releaseId: 'rel-cmd', taskName, task, deviceClass: demoDeviceClass, weightsPath: join(dir.path, file) });

function driver(camera: string[], accelerator: { weights?: string[]; memory?: string[] }, timeoutMs = 10_000) {
  const tools = createToolRunner();
  const o = { tools, deviceId: 'unit-7', timeoutMs };
  return composeDriver(createCommandCamera(o, camera), createCommandAccelerator(o, accelerator), tools);
}

const lines = (path: string) => (existsSync(path) ? readFileSync(path, 'utf8').split('\n').filter(Boolean).map((l) => JSON.parse(l) as Record<string, unknown>) : []);

describe('command driver with real scripts', () => {
  it('runs the worked example for every step: settings as JSON on stdin, the verified weights path handed over', async () => {
    const log = join(dir.path, 'steps.log');
    const cmd = ['node', EXAMPLE, log];
    const d = driver(cmd, { weights: cmd, memory: cmd });
    expect((await switchProfile(d, null, target(rows, 'rows', 'rows.bin'), systemClock)).ok).toBe(true);
    expect((await switchProfile(d, target(rows, 'rows', 'rows.bin'), target(leaves, 'leaves', 'leaves.bin'), systemClock)).ok).toBe(true);
    expect(lines(log)).toEqual([
      { step: 'memory', task: 'rows', weightBufferKib: 1024, activationBufferKib: 512 },
      { step: 'weights', task: 'rows', model: 'rows-net', path: join(dir.path, 'rows.bin'), sha256: rowsW.sha256 },
      { step: 'camera', task: 'rows', focusDistanceM: 0.5, fNumber: 4, exposureUs: 2000, analogGain: 2, frameRateHz: 10 },
      { step: 'memory', task: 'leaves', weightBufferKib: 768, activationBufferKib: 256 },
      { step: 'weights', task: 'leaves', model: 'leaf-net', path: join(dir.path, 'leaves.bin'), sha256: leavesW.sha256 },
      { step: 'camera', task: 'leaves', focusDistanceM: 0.25, fNumber: 2.8, exposureUs: 2000, analogGain: 2, frameRateHz: 10 },
    ]);
  });

  it('hands each command the whole documented input', async () => {
    const capture = join(dir.path, 'capture.sh');
    writeFileSync(capture, `#!/bin/sh\ncat > "${join(dir.path, 'stdin-')}$OCELLUS_STEP.json"\n`);
    chmodSync(capture, 0o755);
    const d = driver([capture], { weights: [capture] });
    expect((await switchProfile(d, null, target(rows, 'rows', 'rows.bin'), systemClock)).ok).toBe(true);
    const camera = JSON.parse(readFileSync(join(dir.path, 'stdin-camera.json'), 'utf8'));
    expect(camera).toEqual({
      format: COMMAND_INPUT_FORMAT, step: 'camera', deviceId: 'unit-7', releaseId: 'rel-cmd', task: 'rows', profileId: 'rows-net-profile', profileRevision: 1,
      camera: rows.camera, frameRateHz: 10, deviceClass: demoDeviceClass,
    });
    expect(JSON.parse(readFileSync(join(dir.path, 'stdin-weights.json'), 'utf8'))).toMatchObject({
      step: 'weights', weightsPath: join(dir.path, 'rows.bin'), sha256: rowsW.sha256, model: { id: 'rows-net', version: '1', sizeBytes: rowsW.bytes.length },
    });
  });

  it('a failing command fails its step with the exit code and stderr, and the previous settings are run again', async () => {
    const log = join(dir.path, 'fail.log');
    const cmd = ['node', EXAMPLE, log];
    const d = driver(cmd, { memory: cmd });
    expect((await switchProfile(d, null, target(rows, 'rows', 'rows.bin'), systemClock)).ok).toBe(true);
    // 200 ms at 10 fps is longer than the 100 ms frame period: the example refuses with exit code 3.
    const tooLong: ReleaseTask = { ...leaves, camera: { ...leaves.camera, exposureUs: 200_000 } };
    const outcome = await switchProfile(d, target(rows, 'rows', 'rows.bin'), target(tooLong, 'leaves', 'leaves.bin'), systemClock);
    expect(outcome).toMatchObject({ ok: false, step: 'applyCamera', restored: true });
    expect(!outcome.ok && outcome.error).toBe('camera command: node exited with code 3: exposure 200000 µs is longer than the frame period at 10 fps');
    expect(lines(log).map((l) => `${l.step} ${l.task}`)).toEqual(['memory rows', 'camera rows', 'memory leaves', 'memory rows', 'camera rows']);
  });

  it('a command over its time limit is stopped and its step fails', async () => {
    const d = driver(['sleep', '5'], {}, 300);
    const outcome = await switchProfile(d, null, target(rows, 'rows', 'rows.bin'), systemClock);
    expect(outcome).toMatchObject({ ok: false, step: 'applyCamera' });
    expect(!outcome.ok && outcome.error).toBe('camera command: sleep was stopped after its time limit of 300 ms');
  });

  it('a program that does not exist fails its step saying so', async () => {
    const d = driver([join(dir.path, 'no-such-program')], {});
    const outcome = await switchProfile(d, null, target(rows, 'rows', 'rows.bin'), systemClock);
    expect(!outcome.ok && outcome.error).toMatch(/^camera command: .*no-such-program exited with code null: cannot start .*no-such-program: spawn .* ENOENT$/);
  });
});
