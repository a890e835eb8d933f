/** What a command may touch: its output streams, the working folder and the environment. */
export interface CliIo {
  stdout: (text: string) => void;
  stderr: (text: string) => void;
  cwd: string;
  env: Readonly<Record<string, string | undefined>>;
  /** Whether stderr is a terminal (progress bars are drawn only there). */
  stderrIsTty?: boolean;
}

/** Every command module exports `run` with this shape and returns the exit code. */
export type CommandRun = (args: string[], io: CliIo) => Promise<number>;

/** Exit codes: all checks pass; a check fails; bad usage or bad input. */
export const EXIT_OK = 0;
export const EXIT_CHECK_FAILED = 1;
export const EXIT_BAD_INPUT = 2;

/** An in-memory io for running commands in-process (tests, the console's server side). */
export function captureIo(cwd: string, env: Record<string, string | undefined> = {}): CliIo & { out: () => string; err: () => string } {
  let out = '';
  let err = '';
  return {
    stdout: (t) => void (out += t),
    stderr: (t) => void (err += t),
    cwd,
    env,
    out: () => out,
    err: () => err,
  };
}
