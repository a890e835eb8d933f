/** Agents as real processes: `node --import tsx device-agent/main.ts`, and the `ocellus-agent task` command. */
import { spawn, type ChildProcess } from 'node:child_process';
import { waitFor } from './agent-fixtures.js';

export interface AgentProcess {
  child: ChildProcess;
  output: string[];
  waitForOutput(pattern: RegExp, what: string, timeoutMs?: number): Promise<void>;
  /** SIGKILL: no clean shutdown, like a power cut of the agent process. */
  kill(): Promise<void>;
  /** SIGTERM: clean shutdown. */
  stop(): Promise<number | null>;
}

const ROOT = new URL('..', import.meta.url).pathname;

export function spawnAgent(args: string[]): AgentProcess {
  const child = spawn(process.execPath, ['--import', 'tsx', 'device-agent/main.ts', ...args], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
  const output: string[] = [];
  child.stdout!.on('data', (c: Buffer) => output.push(...c.toString('utf8').split('\n').filter(Boolean)));
  child.stderr!.on('data', (c: Buffer) => output.push(...c.toString('utf8').split('\n').filter(Boolean)));
  const exited = new Promise<number | null>((resolve) => child.once('exit', (code) => resolve(code)));
  return {
    child,
    output,
    waitForOutput: async (pattern, what, timeoutMs = 30_000) => {
      await waitFor(() => output.some((l) => pattern.test(l)) || child.exitCode !== null, what, timeoutMs);
      if (!output.some((l) => pattern.test(l))) throw new Error(`agent exited before ${what}:\n${output.join('\n')}`);
    },
    kill: async () => {
      if (child.exitCode === null) child.kill('SIGKILL');
      await exited;
    },
    stop: async () => {
      if (child.exitCode === null) child.kill('SIGTERM');
      return exited;
    },
  };
}

/** Runs `ocellus-agent <args>` to completion and returns its exit code and output. */
export function runAgentCommand(args: string[]): Promise<{ code: number | null; stdout: string; stderr: string }> {
  const child = spawn(process.execPath, ['--import', 'tsx', 'device-agent/main.ts', ...args], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
  let stdout = '';
  let stderr = '';
  child.stdout.on('data', (c: Buffer) => (stdout += c.toString('utf8')));
  child.stderr.on('data', (c: Buffer) => (stderr += c.toString('utf8')));
  return new Promise((resolve) => child.once('exit', (code) => resolve({ code, stdout, stderr })));
}
