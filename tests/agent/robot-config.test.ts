import { describe, expect, it } from 'vitest';
import { resolveAgentSettings } from '../../device-agent/config.js';

const base = { deviceId: 'gh-07', deviceClassId: 'gh-rowcam-a', brokerUrl: 'mqtt://127.0.0.1:1884', password: 'pw', serverUrl: 'http://127.0.0.1:8080', publicKeyPath: '/k.pem', dataDir: '/d' };
const resolve = (file: Record<string, unknown>, argv: string[] = [], env: Record<string, string> = {}) =>
  resolveAgentSettings({ argv: ['--config', '/etc/ocellus/agent.json', ...argv], env, readFile: () => JSON.stringify({ ...base, ...file }) });

describe('robot-side configuration: drivers and task sources', () => {
  it('takes a V4L2 camera with the ROS 2 source, with defaults for what is left out', () => {
    const r = resolve({ driver: 'v4l2', taskSource: 'ros2', weightsCommand: ['/opt/robot/bin/load-model', '--socket', '/run/infer.sock'] }, ['--v4l2-device', '/dev/video2'], { OCELLUS_AGENT_V4L2_TOLERANCE_PCT: '5' });
    expect(r).toMatchObject({
      ok: true,
      settings: {
        driver: 'v4l2', v4l2Device: '/dev/video2', v4l2Ctl: 'v4l2-ctl', v4l2GainControl: 'auto', v4l2TolerancePct: 5,
        weightsCommand: ['/opt/robot/bin/load-model', '--socket', '/run/infer.sock'], commandTimeoutMs: 10_000,
        taskSource: 'ros2', rosbridgeUrl: 'ws://127.0.0.1:9090', rosTaskTopic: '/robot/task', rosStatusTopic: '/ocellus/status', rosReconnectMs: 1000,
      },
    });
  });

  it('splits a command given as one string (flags, environment) at spaces, without a shell', () => {
    const r = resolve({ driver: 'command' }, ['--camera-command', '/opt/robot/bin/set-camera --unit 3']);
    expect(r.ok && r.settings.cameraCommand).toEqual(['/opt/robot/bin/set-camera', '--unit', '3']);
  });

  it('names the field and where it came from when a driver or source option is wrong', () => {
    const r = resolve({ driver: 'command', rosTaskTopic: 'robot/task' }, ['--rosbridge-url', 'http://127.0.0.1:9090']);
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.issues).toEqual(expect.arrayContaining([
      { path: '/etc/ocellus/agent.json: rosTaskTopic', message: 'must be an absolute ROS 2 topic name such as /robot/task' },
      { path: '--rosbridge-url', message: 'must be a ws:// or wss:// URL (rosbridge_server, e.g. ws://127.0.0.1:9090)' },
    ]));
  });

  it('says what a chosen driver still needs, naming the missing field', () => {
    const cmd = resolve({ driver: 'command' });
    expect(!cmd.ok && cmd.issues).toEqual([
      { path: 'cameraCommand (config file, OCELLUS_AGENT_CAMERA_COMMAND or --camera-command)', message: 'driver "command" needs cameraCommand (the program that applies camera settings)' },
    ]);
    const lc = resolve({ driver: 'libcamera' });
    expect(!lc.ok && lc.issues[0]!.path).toMatch(/^libcameraControlsFile /);
    const bad = resolve({ driver: 'v4l3', cameraCommand: [] });
    expect(!bad.ok && bad.issues.map((i) => i.path)).toEqual(['/etc/ocellus/agent.json: driver', '/etc/ocellus/agent.json: cameraCommand']);
  });
});

describe('ocellus-agent --help', () => {
  it('shows each driver and task source with an example and the safety caution', async () => {
    const { runAgentCommand } = await import('../support/agent-process-rig.js');
    const r = await runAgentCommand(['--help']);
    expect(r.code).toBe(0);
    for (const text of ['--driver v4l2 --v4l2-device /dev/video0', '--driver libcamera', '--driver command', '--task-source ros2 --rosbridge-url ws://127.0.0.1:9090', 'std_msgs/msg/String', '--rosbridge-url (OCELLUS_AGENT_ROSBRIDGE_URL)', 'can hide obstacles']) {
      expect(r.stdout).toContain(text);
    }
  });
});
