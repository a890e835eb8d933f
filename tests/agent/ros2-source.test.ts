import { describe, expect, it } from 'vitest';
import { signedReleaseText } from '../../src/protocol/release.js';
import { createAgent, type Agent } from '../../device-agent/agent.js';
import { systemClock } from '../../device-agent/clock.js';
import { createSimDriver } from '../../device-agent/sim-driver.js';
import { STATUS_FORMAT, createRos2TaskSource, loadRoslib } from '../../device-agent/task-sources/ros2-source.js';
import type { TaskSource } from '../../device-agent/task-sources/task-source.js';
import { demoRelease, sign, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { agentConfig } from '../support/agent-rig.js';
import { agentSuite } from '../support/agent-suite.js';
import { startRosbridge } from '../support/rosbridge-rig.js';

const suite = agentSuite({ rows: 'rows-net ros2', leaves: 'leaf-net ros2' });
const { tasks } = suite;

/** An agent (simulated driver) with a release applied, and its ROS 2 source on a rosbridge of the test's own. */
async function robot(label: string, withMotion = false) {
  const bridge = await startRosbridge();
  const id = uniqueDeviceId(label);
  const dir = suite.dir(label);
  const logs: string[] = [];
  let source: TaskSource | null = null;
  const agent: Agent = createAgent({
    config: agentConfig(id, suite.bus.enrol(id), suite.bus.brokerUrl, suite.web.url, dir.path),
    driver: createSimDriver({ clock: systemClock, timeScale: 0 }),
    log: (l) => logs.push(l),
    onStateChange: (s) => source?.report(s),
  });
  source = createRos2TaskSource(
    {
      url: bridge.url, taskTopic: '/robot/task', statusTopic: '/ocellus/status', reconnectMs: 50, reconnectMaxMs: 400, deviceId: id,
      ...(withMotion ? { motionTopic: '/robot/moving' } : {}),
      handlers: { setTask: (t) => agent.robotTask(t), setMotion: (m) => agent.setMotion(m), log: (l) => logs.push(l) },
    },
    await loadRoslib(),
  );
  suite.onCleanup(async () => {
    await source!.close();
    await agent.stop();
    await bridge.stop();
  });
  await agent.start();
  source.start();
  await waitFor(() => agent.connected() && source!.connected(), 'agent on the broker and the rosbridge');
  await suite.bus.bridge.publishRelease(id, signedReleaseText(sign(demoRelease(`rel-${label}`, 1, tasks))));
  await waitFor(() => agent.state().activeTask === 'rows', 'release applied on its default task');
  const statuses = () => bridge.published('/ocellus/status').map((m) => JSON.parse((m as { data: string }).data) as Record<string, unknown>);
  return { id, agent, source, bridge, logs, statuses };
}

describe('ROS 2 task source through the rosbridge v2 protocol', () => {
  it('subscribes to the task topic, switches profiles on it and publishes the active task, revision and release back', async () => {
    const r = await robot('ros-task');
    expect(r.bridge.ops).toEqual(expect.arrayContaining([
      expect.objectContaining({ op: 'subscribe', topic: '/robot/task', type: 'std_msgs/msg/String' }),
      expect.objectContaining({ op: 'advertise', topic: '/ocellus/status', type: 'std_msgs/msg/String' }),
    ]));
    r.bridge.robotPublish('/robot/task', { data: 'leaves' });
    await waitFor(() => r.agent.state().activeTask === 'leaves', 'switched to leaves by the task topic');
    await waitFor(() => r.statuses().some((s) => s.activeTask === 'leaves'), 'status published with leaves');
    expect(r.statuses().at(-1)).toMatchObject({
      format: STATUS_FORMAT, deviceId: r.id, activeTask: 'leaves', profileId: 'leaf-net-profile', profileRevision: 1, releaseId: 'rel-ros-task', releaseVersion: 1, taskRefused: null,
    });
    // The switch took the agent's usual path: one task-switched event, measured like any other.
    const switched = await waitFor(() => suite.storedEvents(r.id, 'task-switched').find((e) => e.toTask === 'leaves'), 'switch event stored');
    expect(switched).toMatchObject({ fromTask: 'rows', reason: 'local' });
    expect(typeof switched.overheadMs).toBe('number');
  });

  it('an unknown task name is refused with a switch-failed event and on the status topic; the profile stays', async () => {
    const r = await robot('ros-unknown');
    r.bridge.robotPublish('/robot/task', { data: 'harvest' });
    const failed = await waitFor(() => suite.storedEvents(r.id, 'switch-failed')[0], 'refusal stored');
    expect(failed).toMatchObject({ toTask: 'harvest', step: 'select-task', restored: true });
    expect(String(failed.error)).toBe('task harvest is not in release rel-ros-unknown; it has: rows, leaves');
    await waitFor(() => r.statuses().some((s) => s.taskRefused !== null), 'refusal on the status topic');
    expect(r.statuses().at(-1)).toMatchObject({ activeTask: 'rows', taskRefused: { task: 'harvest' } });
    // A message that is no task name is logged and changes nothing.
    r.bridge.robotPublish('/robot/task', { data: 42 });
    await waitFor(() => r.logs.some((l) => l.includes('ignored a message on /robot/task')), 'bad message logged');
    expect(r.agent.state().activeTask).toBe('rows');
  });

  it('takes the robot\'s motion from its own topic', async () => {
    const r = await robot('ros-motion', true);
    r.bridge.robotPublish('/robot/moving', { data: true });
    await waitFor(() => r.agent.state().moving, 'moving from the motion topic');
    r.bridge.robotPublish('/robot/moving', { data: false });
    await waitFor(() => !r.agent.state().moving, 'stopped from the motion topic');
    await waitFor(() => suite.storedEvents(r.id, 'motion').length === 2, 'motion events stored');
  });

  it('the bridge going away and coming back loses no task change', async () => {
    const r = await robot('ros-outage');
    await r.bridge.stop();
    await waitFor(() => !r.source.connected(), 'agent sees the bridge gone');
    // While the bridge is down the robot moves on to another task; its publisher keeps the last value.
    r.bridge.robotPublish('/robot/task', { data: 'leaves' });
    await r.bridge.start();
    await waitFor(() => r.agent.state().activeTask === 'leaves', 'task change made during the outage applied after reconnecting');
    await waitFor(() => r.statuses().some((s) => s.activeTask === 'leaves'), 'status published again after reconnecting');
    expect(r.logs.filter((l) => l.startsWith('ros2: connected to')).length).toBeGreaterThanOrEqual(2);
    // And the next change after the outage arrives as usual.
    r.bridge.robotPublish('/robot/task', { data: 'rows' });
    await waitFor(() => r.agent.state().activeTask === 'rows', 'change after the outage');
    // The switch is stored once the agent's event batch reaches the server: wait for it, within the deadline.
    await waitFor(() => suite.storedEvents(r.id, 'task-switched').length >= 3, 'the three switches stored');
    expect(suite.storedEvents(r.id, 'task-switched').map((e) => e.toTask)).toEqual(['rows', 'leaves', 'rows']);
  });

  it('keeps retrying a bridge that is not there yet and connects once it is up', async () => {
    const bridge = await startRosbridge();
    const url = bridge.url;
    await bridge.stop();
    const logs: string[] = [];
    const source = createRos2TaskSource(
      { url, taskTopic: '/robot/task', statusTopic: '/ocellus/status', reconnectMs: 50, reconnectMaxMs: 200, deviceId: 'x', handlers: { setTask: async (task) => ({ ok: true, task, overheadMs: 0, actuationMs: 0 }), setMotion: () => {}, log: (l) => logs.push(l) } },
      await loadRoslib(),
    );
    suite.onCleanup(() => source.close());
    source.start();
    await new Promise((r) => setTimeout(r, 300));
    expect(source.connected()).toBe(false);
    await bridge.start();
    await waitFor(() => source.connected(), 'connected once the bridge is up');
  });
});
