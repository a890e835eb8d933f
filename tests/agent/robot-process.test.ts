import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { signedReleaseText } from '../../src/protocol/release.js';
import { callControl } from '../../device-agent/control-client.js';
import type { ControlEndpoint } from '../../device-agent/control-server.js';
import type { ReleaseTask } from '../../src/protocol/index.js';
import { demoRelease, demoTask, demoWeights, sign, tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { agentConfig, startBusRig, startWeightsServer, writeProcessConfig, type BusRig, type WeightsServer } from '../support/agent-rig.js';
import { spawnTsProcess, type AgentProcess } from '../support/agent-process-rig.js';
import { startRosbridge, type RosbridgeRig } from '../support/rosbridge-rig.js';
import { calibratedRowcam, v4l2Standin, type V4l2Standin } from '../support/v4l2-rig.js';

const rowsW = demoWeights('rows-net robot');
const leavesW = demoWeights('leaf-net robot');
const rows: ReleaseTask = { ...demoTask('rows-net', rowsW, 0.5, 2.8), frameRateHz: 10 };
const leaves: ReleaseTask = { ...demoTask('leaf-net', leavesW, 0.25, 2.8), camera: { focusDistanceM: 0.25, fNumber: 2.8, exposureUs: 4000, analogGain: 4 }, frameRateHz: 15 };
const tasks = { rows, leaves };

let bus: BusRig;
let web: WeightsServer;
let ros: RosbridgeRig;
let standin: V4l2Standin;
const work = tempDir('robot-process');
const procs: AgentProcess[] = [];

beforeAll(async () => {
  bus = await startBusRig();
  web = await startWeightsServer();
  web.files.set('/api/v1/models/rows-net/weights', rowsW.bytes);
  web.files.set('/api/v1/models/leaf-net/weights', leavesW.bytes);
  ros = await startRosbridge();
  standin = v4l2Standin(work.path);
  standin.setCameras({
    '/dev/video0': { fixture: 'uvc-rowcam', frameRates: [5, 10, 15, 30] },
    '/dev/video1': { fixture: 'uvc-fixedfocus', frameRates: [10, 15, 30] },
  });
});
afterAll(async () => {
  for (const p of procs) await p.kill();
  await ros.stop();
  await web.close();
  await bus.close();
  work.remove();
});

function robotAgent(label: string, device: string) {
  const id = uniqueDeviceId(label);
  const config = agentConfig(id, bus.enrol(id), bus.brokerUrl, web.url, join(work.path, id), {
    deviceClassId: calibratedRowcam.id, driver: 'v4l2', v4l2Device: device,
    taskSource: 'ros2', rosbridgeUrl: ros.url, rosTaskTopic: `/${label.replace(/-/g, '_')}/task`, rosReconnectMs: 50,
  });
  const configPath = writeProcessConfig(work.path, config);
  const start = async () => {
    const p = spawnTsProcess('device-agent/main.ts', ['--config', configPath], 'agent', standin.env);
    procs.push(p);
    await p.waitForOutput(/agent: control endpoint/, 'control endpoint open');
    return p;
  };
  const state = async () => {
    const ep = JSON.parse(readFileSync(join(config.dataDir, 'control.json'), 'utf8')) as ControlEndpoint;
    return (await callControl(ep, 'GET', '/state')).body as { activeTask: string | null; refused: { reason: string } | null; releaseId: string | null };
  };
  return { id, config, start, state, taskTopic: config.rosTaskTopic };
}

describe('agent process on the V4L2 driver with the ROS 2 task source', () => {
  it('applies a release on the camera, follows the robot\'s task topic, and after a kill restarts into the last profile from disk', async () => {
    const a = robotAgent('robot-v4l2', '/dev/video0');
    const first = await a.start();
    await first.waitForOutput(/task source ros2 via rosbridge/, 'ROS 2 source started');
    await bus.bridge.publishRelease(a.id, signedReleaseText(sign(demoRelease('rel-robot-1', 1, tasks, { deviceClass: calibratedRowcam, deviceClassId: calibratedRowcam.id, audience: { deviceClassId: calibratedRowcam.id } }))));
    await waitFor(async () => (await a.state()).activeTask === 'rows', 'release applied on rows');
    expect(standin.values('/dev/video0')).toMatchObject({ auto_exposure: 1, exposure_time_absolute: 20, gain: 43, focus_absolute: 50 });

    await waitFor(() => ros.ops.some((o) => o.op === 'subscribe' && o.topic === a.taskTopic), 'subscribed to the task topic');
    ros.robotPublish(a.taskTopic, { data: 'leaves' });
    await waitFor(async () => (await a.state()).activeTask === 'leaves', 'leaves from the task topic');
    expect(standin.values('/dev/video0')).toMatchObject({ exposure_time_absolute: 40, gain: 128, focus_absolute: 100 });
    expect(standin.fps('/dev/video0')).toBe(15);

    // The task file is written behind the switch; the cut comes once it is on disk.
    await waitFor(() => { try { return JSON.parse(readFileSync(join(a.config.dataDir, 'active-task.json'), 'utf8')).task === 'leaves'; } catch { return false; } }, 'active task on disk');
    // Power cut of the agent; the camera is power-cycled too, and neither broker nor bridge is there on restart.
    await first.kill();
    standin.powerCycle('/dev/video0'); // back to the recorded values: auto exposure, continuous autofocus
    await bus.stopBroker();
    await ros.stop();
    try {
      const second = await a.start();
      await waitFor(async () => (await a.state()).activeTask === 'leaves', 'last task restored from disk').catch(async (e: Error) => { throw new Error(`${e.message}\n${JSON.stringify(await a.state())}\n${JSON.stringify(standin.calls().slice(-4))}`); });
      expect(standin.values('/dev/video0')).toMatchObject({ auto_exposure: 1, focus_automatic_continuous: 0, exposure_time_absolute: 40, gain: 128, focus_absolute: 100 });
      expect(standin.fps('/dev/video0')).toBe(15);
      await second.stop();
    } finally {
      await bus.startBroker();
      await ros.start();
    }
  });

  it('refuses a release that needs a control the camera lacks, and says why in its state', async () => {
    const a = robotAgent('robot-fixed', '/dev/video1');
    await a.start();
    await bus.bridge.publishRelease(a.id, signedReleaseText(sign(demoRelease('rel-robot-ff', 1, tasks, { deviceClass: calibratedRowcam, deviceClassId: calibratedRowcam.id, audience: { deviceClassId: calibratedRowcam.id } }))));
    const refused = await waitFor(async () => (await a.state()).refused, 'release refused');
    expect(refused.reason).toMatch(/^this device cannot run it \(v4l2 \/dev\/video1 \+ accelerator none\): task rows: needs the V4L2 control focus_absolute/);
    expect((await a.state()).activeTask).toBeNull();
    expect(standin.calls().filter((c) => c[1] === '/dev/video1' && c.some((x) => x.startsWith('--set')))).toEqual([]);
  });

  it('stops at start with the camera\'s reason when the device cannot be opened', async () => {
    const a = robotAgent('robot-nocam', '/dev/video7');
    const p = spawnTsProcess('device-agent/main.ts', ['--config', writeProcessConfig(work.path, a.config)], 'agent', standin.env);
    procs.push(p);
    await p.waitForOutput(/reading the control list failed/, 'the camera\'s reason');
    await waitFor(() => p.child.exitCode !== null, 'agent exited');
    expect(p.child.exitCode).toBe(1);
    expect(p.output.join('\n')).toContain('agent: v4l2 /dev/video7: reading the control list failed: v4l2-ctl exited with code 1: Cannot open device /dev/video7, exiting.');
  });
});
