import type { AgentSettings } from '../config.js';
import type { TaskSource, TaskSourceHandlers } from './task-source.js';

/** The task source the settings name besides the local control endpoint; roslib is loaded only for ros2. */
export async function selectTaskSource(s: AgentSettings, handlers: TaskSourceHandlers): Promise<TaskSource | null> {
  if (s.taskSource !== 'ros2') return null;
  const { createRos2TaskSource, loadRoslib } = await import('./ros2-source.js');
  return createRos2TaskSource(
    {
      url: s.rosbridgeUrl, taskTopic: s.rosTaskTopic, statusTopic: s.rosStatusTopic, reconnectMs: s.rosReconnectMs, reconnectMaxMs: s.rosReconnectMaxMs,
      deviceId: s.deviceId, handlers, ...(s.rosMotionTopic ? { motionTopic: s.rosMotionTopic } : {}),
    },
    await loadRoslib(),
  );
}
