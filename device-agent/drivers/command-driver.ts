/**
 * Driver steps as an integrator's commands, for vendor SDKs and inference servers on the robot. Each
 * step runs its program (no shell) with one JSON document on stdin, within a time limit; exit code 0
 * means the step is done, anything else fails the step with the exit code and the tail of stderr.
 * The contract is in device-agent/README.md ("Command driver"), with a worked example script.
 */
import type { ProfileTarget } from '../driver.js';
import type { AcceleratorPart, CameraPart } from './parts.js';
import { describeToolEnd, type ToolRunner } from './run-tool.js';

/** Format of the stdin document, so a command can tell what it is reading. */
export const COMMAND_INPUT_FORMAT = 'ocellus.driver-step/1';

export interface CommandOptions {
  tools: ToolRunner;
  deviceId: string;
  timeoutMs: number;
}

function context(target: ProfileTarget) {
  return { releaseId: target.releaseId, task: target.taskName, profileId: target.task.profileId, profileRevision: target.task.revision };
}

async function runStep(o: CommandOptions, command: readonly string[], step: string, input: Record<string, unknown>): Promise<void> {
  const [program, ...args] = command;
  const stdin = `${JSON.stringify({ format: COMMAND_INPUT_FORMAT, step, deviceId: o.deviceId, ...input })}\n`;
  const r = await o.tools.run(program!, args, { stdin, timeoutMs: o.timeoutMs, env: { ...process.env, OCELLUS_STEP: step } });
  if (r.code !== 0 || r.timedOut) throw new Error(`${step} command: ${describeToolEnd(program!, r, o.timeoutMs)}`);
}

export function createCommandCamera(o: CommandOptions, command: readonly string[]): CameraPart {
  return {
    name: `command ${command[0]}`,
    applyCamera: function applyCamera(settings, target) {
      return runStep(o, command, 'camera', { ...context(target), camera: settings, frameRateHz: target.task.frameRateHz, deviceClass: target.deviceClass });
    },
  };
}

/** Memory and weights steps as commands; a step without a command runs nothing. */
export function createCommandAccelerator(o: CommandOptions, commands: { weights?: readonly string[]; memory?: readonly string[] }): AcceleratorPart {
  return {
    name: `commands (${[commands.memory ? 'memory' : null, commands.weights ? 'weights' : null].filter(Boolean).join(', ') || 'none'})`,
    setMemoryPartition: async function setMemoryPartition(partition, target) {
      if (commands.memory) await runStep(o, commands.memory, 'memory', { ...context(target), memory: partition });
    },
    loadWeights: async function loadWeights(path, sha256, target) {
      if (!commands.weights) return;
      const m = target.task.model;
      await runStep(o, commands.weights, 'weights', { ...context(target), weightsPath: path, sha256, model: { id: m.id, version: m.version, sizeBytes: m.sizeBytes } });
    },
  };
}
