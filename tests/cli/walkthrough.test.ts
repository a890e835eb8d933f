/**
 * The README's walk-through, command by command, in its order, as a new user would type it: read from the
 * README itself, run through bash in a fresh folder (the checkout's package, sources and demo data linked in),
 * with free ports in place of the README's 8180 and 1984, while another server holds the defaults 8080 and
 * 1884 (the demo's). Each command's exit code is checked. Demo data throughout.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, symlinkSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { busForServer } from '../../src/bus/start-bus.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';

const REPO = join(import.meta.dirname, '..', '..');
const work = mkdtempSync(join(tmpdir(), 'ocellus-walkthrough-'));
for (const entry of ['package.json', 'node_modules', 'src', 'device-agent', 'profiles', 'bin', 'dist', 'tsconfig.json']) {
  if (existsSync(join(REPO, entry))) symlinkSync(join(REPO, entry), join(work, entry));
}

/** The sh block of the README's walk-through, as commands (continuation lines joined), comments dropped. */
export function walkthroughCommands(readme: string): Array<{ text: string; keepsShell: boolean }> {
  const section = readme.slice(readme.indexOf('## Walk-through'));
  const block = /```sh\n([\s\S]*?)```/.exec(section)![1]!;
  const joined = block.replace(/\\\n\s*/g, '');
  const out: Array<{ text: string; keepsShell: boolean }> = [];
  let nextKeepsShell = false;
  for (const raw of joined.split('\n')) {
    const line = raw.trim();
    if (line.startsWith('#')) {
      nextKeepsShell = /keeps this shell|on the robot/.test(line) || nextKeepsShell;
      continue;
    }
    if (!line) continue;
    // A trailing comment is for people; quotes in these commands never hold a '#' after two spaces.
    const text = line.replace(/\s{2,}#.*$/, '');
    const longRunning = / serve /.test(text) || /^npm run -s agent -- --device-id/.test(text);
    out.push({ text, keepsShell: longRunning && nextKeepsShell });
    if (longRunning) nextKeepsShell = false;
  }
  return out;
}

async function freePort(): Promise<number> {
  const s = createServer();
  await new Promise<void>((r) => s.listen(0, '127.0.0.1', r));
  const port = (s.address() as { port: number }).port;
  await new Promise<void>((r) => s.close(() => r()));
  return port;
}

function sh(command: string, env: NodeJS.ProcessEnv, timeoutMs = 120_000): Promise<{ code: number | null; stdout: string; stderr: string }> {
  return new Promise((resolve) => {
    const child = spawn('bash', ['-c', command], { cwd: work, env, stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (c: Buffer) => (stdout += c));
    child.stderr.on('data', (c: Buffer) => (stderr += c));
    const timer = setTimeout(() => child.kill('SIGKILL'), timeoutMs);
    child.on('exit', (code) => (clearTimeout(timer), resolve({ code, stdout, stderr })));
  });
}

/** Waits (bounded) for a line in a background command's output. */
async function waitForText(output: () => string, pattern: RegExp, timeoutMs = 30_000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!pattern.test(output())) {
    if (Date.now() > deadline) throw new Error(`no ${pattern} in:\n${output()}`);
    await new Promise((r) => setTimeout(r, 100));
  }
}

const background: ChildProcess[] = [];
let holder: RunningServer | null = null;

afterAll(async () => {
  for (const c of background) {
    try {
      process.kill(-c.pid!, 'SIGINT');
    } catch {
      /* already gone */
    }
  }
  await Promise.all(background.map((c) => new Promise<void>((r) => (c.exitCode !== null ? r() : (c.once('exit', () => r()), setTimeout(() => { try { process.kill(-c.pid!, 'SIGKILL'); } catch { /* gone */ } r(); }, 10_000))))));
  await holder?.close();
  rmSync(work, { recursive: true, force: true });
});

describe('the README walk-through, in order, beside a server on the default ports', () => {
  it('every command exits 0, talks to the server it names and leaves the release rolled out and the robot on its new task', async () => {
    // Another server on the defaults, as the demo would be; if something else already holds them, it plays that part.
    holder = await startServer({ dataDir: join(work, 'default-server'), port: 8080, adminToken: `holder-${'x'.repeat(24)}`, bus: busForServer({ embedded: { port: 1884 } }) }).catch(() => null);
    const httpPort = await freePort();
    const mqttPort = await freePort();
    const commands = walkthroughCommands(readFileSync(join(REPO, 'README.md'), 'utf8')).map((c) => ({
      ...c,
      text: c.text.replace(/\b8180\b/g, String(httpPort)).replace(/\b1984\b/g, String(mqttPort)),
    }));
    expect(commands.length).toBeGreaterThan(15);
    const env: NodeJS.ProcessEnv = { PATH: process.env.PATH, HOME: process.env.HOME, TMPDIR: process.env.TMPDIR };
    const ran: string[] = [];
    // What the agent's shell shows.
    let agentOut = () => '';
    for (const c of commands) {
      const exported = /^export ([A-Z_]+)=(.*)$/.exec(c.text);
      if (exported) {
        const [, name, value] = exported;
        // The assignment's status is its command substitution's: a failing command inside fails here.
        const r = await sh(`${name}=${value} || exit $?; printf '%s' "$${name}"`, env);
        expect(r.code, `${c.text}\n${r.stderr}`).toBe(0);
        expect(r.stdout, `${c.text} gave an empty value`).not.toBe('');
        env[name!] = r.stdout.trim();
        ran.push(`export ${name}`);
        continue;
      }
      if (c.keepsShell) {
        const child = spawn('bash', ['-c', c.text], { cwd: work, env: { ...env }, stdio: ['ignore', 'pipe', 'pipe'], detached: true });
        let out = '';
        child.stdout!.on('data', (b: Buffer) => (out += b));
        child.stderr!.on('data', (b: Buffer) => (out += b));
        background.push(child);
        if (!/ serve /.test(c.text)) agentOut = () => out;
        const deadline = Date.now() + 90_000;
        const ready = / serve /.test(c.text)
          ? async () => fetch(`http://127.0.0.1:${httpPort}/api/v1/openapi.json`).then((res) => res.ok, () => false)
          : async () => existsSync(join(work, 'agent-data', 'control.json')) && /connected to/.test(out);
        while (!(await ready())) {
          if (child.exitCode !== null) throw new Error(`${c.text} exited with ${child.exitCode}:\n${out}`);
          if (Date.now() > deadline) throw new Error(`${c.text} did not come up:\n${out}`);
          await new Promise((r) => setTimeout(r, 200));
        }
        ran.push(/ serve /.test(c.text) ? 'serve' : 'agent');
        continue;
      }
      if (/ agent -- task /.test(c.text)) {
        // "once the rollout is completed": a person looks at 'rollout status' until it says so.
        const deadline = Date.now() + 90_000;
        for (;;) {
          const s = await sh('npm run -s ocellus -- rollout status', env);
          expect(s.code, s.stderr).toBe(0);
          if (/ completed /.test(s.stdout)) break;
          if (Date.now() > deadline) throw new Error(`the rollout did not complete:\n${s.stdout}`);
          await new Promise((r) => setTimeout(r, 500));
        }
      }
      const r = await sh(c.text, env);
      expect(r.code, `${c.text}\nstdout: ${r.stdout}\nstderr: ${r.stderr}`).toBe(0);
      ran.push(c.text);
      if (/ agent -- task /.test(c.text)) {
        // Milliseconds to one decimal, not timer noise.
        expect(r.stdout).toMatch(/^switched to task leaf-inspection \(actuation \d+(\.\d)? ms\)\n$/);
        // The robot's shell said what reached it and what it switched to, as it happened.
        expect(agentOut()).toMatch(/agent: applied release gh-scout-a-v1 \(version 1\)/);
        await waitForText(agentOut, /agent: task leaf-inspection: profile leaf-inspection-a revision 1 of release gh-scout-a-v1 \(local, from row-navigation\)/);
      }
      if (/ history gh-a-01$/.test(c.text)) expect(r.stdout).toMatch(/leaf-inspection/);
      if (/\/metrics$/.test(c.text)) expect(r.stdout).toContain('# TYPE');
      if (/ push /.test(c.text)) expect(r.stdout).toMatch(/profile/);
    }
    // The order of the README: serve, the laptop's commands, the robot, the rollout, the task, the history.
    expect(ran.slice(0, 2)).toEqual(['export OCELLUS_ADMIN_TOKEN', 'serve']);
    expect(ran).toContain('agent');
    expect(ran.findIndex((t) => / rollout create /.test(t))).toBeLessThan(ran.findIndex((t) => / agent -- task /.test(t)));
    expect(existsSync(join(work, 'gh-a-01.mcap'))).toBe(true);
    // Nothing went to the server on the default ports.
    if (holder) expect(holder.store.documents.list('task').length).toBe(0);
  }, 400_000);
});
