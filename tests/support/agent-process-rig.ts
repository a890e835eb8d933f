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

const ROOT = new URL('../..', import.meta.url).pathname;

/**
 * Starts a TypeScript entry as a process and collects its output lines; `label` names it in errors. Used for
 * the agent itself and for the fault tests' agent host.
 */
export function spawnTsProcess(entry: string, args: string[], label: string, env: NodeJS.ProcessEnv = process.env): AgentProcess {
  const child = spawn(process.execPath, ['--import', 'tsx', entry, ...args], { cwd: ROOT, env, stdio: ['ignore', 'pipe', 'pipe'] });
  const output: string[] = [];
  child.stdout!.on('data', (c: Buffer) => output.push(...c.toString('utf8').split('\n').filter(Boolean)));
  child.stderr!.on('data', (c: Buffer) => output.push(...c.toString('utf8').split('\n').filter(Boolean)));
  const exited = new Promise<number | null>((resolve) => child.once('exit', (code) => resolve(code)));
  const running = () => child.exitCode === null && child.signalCode === null;
  return {
    child,
    output,
    waitForOutput: async (pattern, what, timeoutMs = 30_000) => {
      await waitFor(() => output.some((l) => pattern.test(l)) || !running(), what, timeoutMs);
      if (!output.some((l) => pattern.test(l))) throw new Error(`${label} exited before ${what}:\n${output.join('\n')}`);
    },
    kill: async () => {
      if (running()) child.kill('SIGKILL');
      await exited;
    },
    stop: async () => {
      if (running()) child.kill('SIGTERM');
      return exited;
    },
  };
}

export function spawnAgent(args: string[]): AgentProcess {
  return spawnTsProcess('device-agent/main.ts', args, 'agent');
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
