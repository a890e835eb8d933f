// The command as a real process: the launcher, exit codes and streams, from inside and outside the checkout.
import { execFile } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';

const repo = join(import.meta.dirname, '..', '..');
const launcher = join(repo, 'bin', 'ocellus.js');
const tsxCli = join(repo, 'node_modules', 'tsx', 'dist', 'cli.mjs');
const elsewhere = mkdtempSync(join(tmpdir(), 'ocellus-proc-'));
afterAll(() => rmSync(elsewhere, { recursive: true, force: true }));

function run(cmd: string[], cwd = repo): Promise<{ code: number; out: string; err: string }> {
  return new Promise((resolve) => {
    execFile(process.execPath, cmd, { cwd, timeout: 60_000 }, (error, out, err) => {
      const code = error ? (typeof error.code === 'number' ? error.code : -1) : 0;
      resolve({ code, out, err });
    });
  });
}

describe('ocellus as a process', () => {
  it('`check profiles/` prints every demo profile and exits 1 for the two failing on purpose', async () => {
    const r = await run([launcher, 'check', 'profiles/']);
    expect(r.code).toBe(1);
    expect(r.out).toContain('10 profiles: 6 pass, 2 pass with warnings, 2 fail');
    expect(r.out).toContain('leaf-inspection-wide-open');
  });

  it('the TypeScript entry run through tsx exits 0 for a passing profile', async () => {
    const r = await run([tsxCli, 'src/cli/main.ts', 'check', 'profiles/greenhouse-demo/task-profiles/fruit-counting-b.json']);
    expect(r.code).toBe(0);
    expect(r.out).toContain('passes');
  });

  it('the launcher works from another folder and passes --json output through (hyperfocal 10.467 m, Greenleaf, "Photographic Optics", 1950)', async () => {
    const r = await run([launcher, 'optics', '--focal-length-mm', '50', '--f-number', '8', '--focus-m', '3', '--coc-mm', '0.03', '--json'], elsewhere);
    expect(r.code).toBe(0);
    expect(JSON.parse(r.out).hyperfocal_m).toBeCloseTo(10.467, 3);
  });

  it('bad input exits 2 with the reason on stderr and nothing on stdout', async () => {
    const r = await run([launcher, 'cost', 'no-such-network.json'], elsewhere);
    expect(r.code).toBe(2);
    expect(r.out).toBe('');
    expect(r.err).toContain('no-such-network.json: (root): no such file');
  });
});
