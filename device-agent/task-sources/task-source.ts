import type { StateMessage } from '../../src/protocol/messages.js';
import type { TaskResult } from '../profile-runner.js';

/** What a task source may ask of the agent. */
export interface TaskSourceHandlers {
  /** Switch to the named task; an unknown name is refused with a switch-failed event. */
  setTask(task: string): Promise<TaskResult>;
  setMotion(moving: boolean): void;
  log(line: string): void;
}

/** Somewhere the robot announces its task besides the local control endpoint (which always stays). */
export interface TaskSource {
  readonly name: string;
  start(): void;
  /** The agent's state changed: tell the robot. */
  report(state: StateMessage): void;
  connected(): boolean;
  close(): Promise<void>;
}
