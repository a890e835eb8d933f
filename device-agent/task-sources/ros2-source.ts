/**
 * The robot's own task signal from ROS 2, through rosbridge's v2 JSON protocol over WebSocket (roslib).
 * Subscribes to the task topic (std_msgs/msg/String, the task name) and, when configured, a motion topic
 * (std_msgs/msg/Bool, true while moving, for the when-idle policy); publishes the agent's status on the
 * status topic (std_msgs/msg/String holding one JSON object) after each change and each reconnection.
 * A lost bridge is reconnected with doubling delays; the topics are subscribed and advertised again.
 */
import type { StateMessage } from '../../src/protocol/messages.js';
import type { TaskSource, TaskSourceHandlers } from './task-source.js';

/**
 * The part of roslib 2.x this source uses. Typed here because roslib 2.1.0's RosLib.d.ts re-exports
 * './src/RosLib' without a file extension, which TypeScript's NodeNext resolution cannot follow.
 */
export interface RosConnection {
  on(event: 'connection' | 'close' | 'error', listener: (e: unknown) => void): unknown;
  connect(url: string): Promise<void>;
  close(): void;
}
export interface RosTopic<T> {
  subscribe(callback: (message: T) => void): void;
  advertise(): void;
  publish(message: T): void;
}
export interface Roslib {
  Ros: new (options: Record<string, never>) => RosConnection;
  Topic: new <T>(options: { ros: RosConnection; name: string; messageType: string; reconnect_on_close?: boolean }) => RosTopic<T>;
}

/** Loads roslib when a ROS 2 source is configured (and only then). */
export async function loadRoslib(): Promise<Roslib> {
  return (await import('roslib')) as unknown as Roslib;
}

export interface Ros2SourceOptions {
  url: string;
  taskTopic: string;
  motionTopic?: string;
  statusTopic: string;
  reconnectMs: number;
  reconnectMaxMs: number;
  deviceId: string;
  handlers: TaskSourceHandlers;
}

export const STATUS_FORMAT = 'ocellus.robot-status/1';
const MAX_TASK_NAME = 64;

export function createRos2TaskSource(o: Ros2SourceOptions, roslib: Roslib): TaskSource {
  const { handlers } = o;
  const { Ros, Topic } = roslib;
  let ros: RosConnection | null = null;
  let status: RosTopic<{ data: string }> | null = null;
  let lastState: StateMessage | null = null;
  let lastTaskRefusal: { task: string; error: string } | null = null;
  let delayMs = o.reconnectMs;
  let timer: NodeJS.Timeout | null = null;
  let closed = false;
  let connected = false;

  function publishStatus() {
    if (!connected || !status || !lastState) return;
    const s = lastState;
    const body = {
      format: STATUS_FORMAT, deviceId: o.deviceId, activeTask: s.activeTask, profileId: s.profileId, profileRevision: s.profileRevision,
      releaseId: s.releaseId, releaseVersion: s.releaseVersion, moving: s.moving, pending: s.pending, refused: s.refused, taskRefused: lastTaskRefusal,
    };
    status.publish({ data: JSON.stringify(body) });
  }

  function onTask(msg: { data?: unknown }) {
    if (typeof msg?.data !== 'string' || msg.data.length === 0 || msg.data.length > MAX_TASK_NAME) {
      handlers.log(`ros2: ignored a message on ${o.taskTopic}: data must be a task name of 1-${MAX_TASK_NAME} characters`);
      return;
    }
    const task = msg.data;
    void handlers.setTask(task).then(
      (r) => {
        lastTaskRefusal = r.ok ? null : { task, error: r.error };
        if (!r.ok) handlers.log(`ros2: task ${task} from ${o.taskTopic} refused: ${lastTaskRefusal!.error}`);
        publishStatus();
      },
      (e: unknown) => handlers.log(`ros2: task ${task} failed: ${(e as Error).message}`),
    );
  }

  function onMotion(msg: { data?: unknown }) {
    if (typeof msg?.data !== 'boolean') return handlers.log(`ros2: ignored a message on ${o.motionTopic}: data must be true or false`);
    handlers.setMotion(msg.data);
  }

  function scheduleReconnect() {
    if (closed || timer) return;
    const wait = delayMs;
    delayMs = Math.min(o.reconnectMaxMs, delayMs * 2);
    timer = setTimeout(() => {
      timer = null;
      connect();
    }, wait);
  }

  function connect() {
    if (closed) return;
    // A new connection each time: the old one's queued subscribe messages die with it.
    const r = new Ros({});
    ros = r;
    r.on('connection', () => {
      if (ros !== r) return;
      connected = true;
      delayMs = o.reconnectMs;
      handlers.log(`ros2: connected to ${o.url}`);
      const topic = (name: string, messageType: string) => new Topic<{ data?: unknown }>({ ros: r, name, messageType, reconnect_on_close: false });
      topic(o.taskTopic, 'std_msgs/msg/String').subscribe(onTask);
      if (o.motionTopic) topic(o.motionTopic, 'std_msgs/msg/Bool').subscribe(onMotion);
      status = new Topic<{ data: string }>({ ros: r, name: o.statusTopic, messageType: 'std_msgs/msg/String', reconnect_on_close: false });
      status.advertise();
      publishStatus();
    });
    r.on('close', () => {
      if (ros !== r) return;
      if (connected) handlers.log(`ros2: lost ${o.url}; reconnecting`);
      connected = false;
      status = null;
      scheduleReconnect();
    });
    // Errors come with a close; the close schedules the retry.
    r.on('error', () => {});
    r.connect(o.url).catch((e: unknown) => {
      handlers.log(`ros2: cannot connect to ${o.url}: ${(e as Error).message}`);
      if (ros === r) scheduleReconnect();
    });
  }

  return {
    name: `ros2 via rosbridge ${o.url} (task ${o.taskTopic}${o.motionTopic ? `, motion ${o.motionTopic}` : ''}, status ${o.statusTopic})`,
    start: connect,
    report: function report(state) {
      lastState = state;
      publishStatus();
    },
    connected: () => connected,
    close: async function close() {
      closed = true;
      if (timer) clearTimeout(timer);
      connected = false;
      ros?.close();
    },
  };
}
