import { spawn } from 'node:child_process';

export interface ToolRun {
  code: number | null;
  signal: NodeJS.Signals | null;
  stdout: string;
  stderr: string;
  timedOut: boolean;
  /** From spawn to exit: the tool's own run time, process start included. */
  ms: number;
}

export interface ToolRunner {
  run(program: string, args: readonly string[], options?: { stdin?: string; timeoutMs?: number; env?: NodeJS.ProcessEnv }): Promise<ToolRun>;
  /** Milliseconds spent waiting for tools so far, so callers can tell their own time from the tools'. */
  toolMs(): number;
}

const MAX_OUTPUT_BYTES = 256 * 1024;

/**
 * Runs external programs (v4l2-ctl, an integrator's command) without a shell: arguments are passed as
 * they are, stdin is written and closed, output is capped, and a time limit kills the process (SIGKILL).
 */
export function createToolRunner(): ToolRunner {
  let totalMs = 0;
  return {
    run: function runTool(program, args, options = {}) {
      return new Promise((resolve) => {
        const t0 = performance.now();
        const child = spawn(program, args, { stdio: ['pipe', 'pipe', 'pipe'], env: options.env ?? process.env });
        let stdout = '';
        let stderr = '';
        let timedOut = false;
        let settled = false;
        const finish = (code: number | null, signal: NodeJS.Signals | null, extra = '') => {
          if (settled) return;
          settled = true;
          if (timer) clearTimeout(timer);
          const ms = performance.now() - t0;
          totalMs += ms;
          resolve({ code, signal, stdout, stderr: stderr + extra, timedOut, ms });
        };
        const timer = options.timeoutMs
          ? setTimeout(() => {
              timedOut = true;
              child.kill('SIGKILL');
            }, options.timeoutMs)
          : null;
        child.stdout.on('data', (c: Buffer) => {
          if (stdout.length < MAX_OUTPUT_BYTES) stdout += c.toString('utf8');
        });
        child.stderr.on('data', (c: Buffer) => {
          if (stderr.length < MAX_OUTPUT_BYTES) stderr += c.toString('utf8');
        });
        child.once('error', (e) => finish(null, null, `cannot start ${program}: ${e.message}`));
        child.once('close', (code, signal) => finish(code, signal));
        // A command that does not read its stdin closes the pipe early; that is not an error of ours.
        child.stdin.on('error', () => {});
        child.stdin.end(options.stdin ?? '');
      });
    },
    toolMs: () => totalMs,
  };
}

/** One line for an error message: how a tool ended and the tail of what it said. */
export function describeToolEnd(program: string, r: ToolRun, timeoutMs?: number): string {
  const how = r.timedOut ? `was stopped after its time limit of ${timeoutMs} ms` : r.signal ? `was killed by ${r.signal}` : `exited with code ${r.code}`;
  const said = r.stderr.trim().split('\n').slice(-5).join(' | ');
  return `${program} ${how}${said ? `: ${said}` : ''}`;
}
