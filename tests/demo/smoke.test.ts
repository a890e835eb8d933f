/**
 * The one-command demo as a process (`ocellus demo --duration 40 --robots 4`): it must exit 0 with a final
 * summary that shows task switches, a finished rollout and stored events, and the history it leaves behind
 * must show the robots' safety habits: releases (apply policy when-idle) applied only while a robot stood
 * still, and tasks done standing entered only after stopping. (Demo data throughout.)
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { waitFor } from '../support/agent-fixtures.js';

const ROOT = new URL('../..', import.meta.url).pathname;
const dir = mkdtempSync(join(tmpdir(), 'ocellus-demo-smoke-'));

afterAll(() => rmSync(dir, { recursive: true, force: true }));

function runDemo(args: string[], whileRunning?: (child: ChildProcess, stdout: () => string) => Promise<void>): Promise<{ code: number | null; stdout: string; stderr: string }> {
  const child = spawn(process.execPath, ['--import', 'tsx', 'src/cli/main.ts', 'demo', ...args], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'], env: { ...process.env, OCELLUS_ADMIN_TOKEN: '' } });
  let stdout = '';
  let stderr = '';
  child.stdout!.on('data', (c: Buffer) => (stdout += c.toString('utf8')));
  child.stderr!.on('data', (c: Buffer) => (stderr += c.toString('utf8')));
  const guard = setTimeout(() => child.kill('SIGKILL'), 150_000);
  const exited = new Promise<{ code: number | null; stdout: string; stderr: string }>((resolve) => child.once('exit', (code) => (clearTimeout(guard), resolve({ code, stdout, stderr }))));
  void whileRunning?.(child, () => stdout).catch((e: unknown) => (stderr += `test: ${(e as Error).message}`));
  return exited;
}

describe('ocellus demo', () => {
  it('runs 40 s with 4 robots, finishes its staged rollout and exits 0 with a final summary', async () => {
    const data = join(dir, 'demo');
    const r = await runDemo(['--duration', '40', '--robots', '4', '--port', '0', '--mqtt-port', '0', '--data', data]);
    expect(r.code, `${r.stdout}\n${r.stderr}`).toBe(0);
    expect(r.stdout).toMatch(/^Caution: this is a simulation with demo data\. Changing perception settings on robots in operation can hide obstacles/);
    expect(r.stdout).toMatch(/console: http:\/\/127\.0\.0\.1:\d+\//);
    expect(r.stdout).toMatch(/admin token: \S{24,}/);
    const final = r.stdout.split('\n').find((l) => l.includes(' final] '));
    expect(final, r.stdout).toBeDefined();
    const switches = Number(/switches (\d+)/.exec(final!)?.[1]);
    const stored = Number(/events stored (\d+)/.exec(final!)?.[1]);
    expect(switches).toBeGreaterThan(0);
    expect(stored).toBeGreaterThan(switches);
    expect(final).toMatch(/rollout ro-[0-9a-f]+ completed, wave 2\/2, 2\/2 robots passed/);
    expect(existsSync(join(data, 'robots', 'gh-a-01', 'events.log'))).toBe(true);

    // What the server recorded: replay each robot's events in order and check when things happened.
    const db = new Database(join(data, 'server', 'ocellus.db'), { readonly: true });
    try {
      const rows = db.prepare('SELECT device_id AS id, type, event FROM device_events ORDER BY device_id, seq').all() as Array<{ id: string; type: string; event: string }>;
      expect(new Set(rows.map((row) => row.id))).toEqual(new Set(['gh-a-01', 'gh-a-02', 'gh-b-01', 'gh-b-02']));
      let device = '';
      let moving = false;
      let applied = 0;
      let standingSwitches = 0;
      for (const row of rows) {
        if (row.id !== device) (device = row.id), (moving = false);
        const e = JSON.parse(row.event) as { moving?: boolean; toTask?: string; reason?: string };
        if (row.type === 'motion') moving = e.moving!;
        if (row.type === 'release-applied') {
          applied += 1;
          expect(moving, `${device} applied a when-idle release while moving`).toBe(false);
        }
        if (row.type === 'task-switched' && e.reason === 'local' && (e.toTask === 'fruit-counting' || e.toTask === 'leaf-inspection')) {
          standingSwitches += 1;
          expect(moving, `${device} switched to ${e.toTask} while moving`).toBe(false);
        }
      }
      // Four first releases and the revised one on both scout A robots.
      expect(applied).toBe(6);
      expect(standingSwitches).toBeGreaterThan(0);
    } finally {
      db.close();
    }
  });

  it('stops cleanly on Ctrl-C, a second Ctrl-C included: exit 0, final summary, ports closed', async () => {
    const r = await runDemo(['--robots', '2', '--port', '0', '--mqtt-port', '0', '--data', join(dir, 'sigint')], async (child, stdout) => {
      await waitFor(() => /\[demo \d+:\d\d\] robots/.test(stdout()), 'the first summary line', 60_000, 100);
      // A terminal sends Ctrl-C to the whole process group, and launchers relay it once more.
      child.kill('SIGINT');
      child.kill('SIGINT');
    });
    expect(r.code, `${r.stdout}\n${r.stderr}`).toBe(0);
    expect(r.stdout).toContain('demo: SIGINT; stopping robots, agents, server and broker');
    expect(r.stdout).toMatch(/\[demo \d+:\d\d final\] robots 2\/2 online/);
    const url = /console: (http:\/\/127\.0\.0\.1:\d+)\//.exec(r.stdout)![1]!;
    await expect(fetch(`${url}/api/v1/openapi.json`)).rejects.toThrow();
  });
});
