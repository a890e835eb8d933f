import { mkdtempSync, readFileSync, writeFileSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { run as check } from '../../src/cli/check.js';
import { captureIo } from '../../src/cli/io.js';
import { run as planCommand } from '../../src/cli/plan.js';
import { halfModel, testCandidates, testDeviceClass, testTask } from '../support/plan-fixtures.js';

let dir: string;

/** A real catalog folder in a temporary directory, written from the test documents. */
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ocellus-plan-cli-'));
  const write = (name: string, doc: unknown) => writeFileSync(join(dir, name), JSON.stringify(doc, null, 2));
  write('device-class.json', testDeviceClass);
  write('task.json', testTask);
  write('task-tight.json', { ...testTask, id: 'test-tight', latencyBudgetMs: 4 });
  testCandidates.forEach((c) => {
    write(`${c.model.id}.json`, c.model);
    write(`${c.network.id}.json`, c.network);
  });
  write('half.json', halfModel);
});

async function ocellusPlan(...args: string[]) {
  const io = captureIo(dir);
  const code = await planCommand([...args, '--catalog', '.'], io);
  return { code, out: io.out(), err: io.err() };
}

describe('ocellus plan', () => {
  it('prints the front as a table and exits 0', async () => {
    const r = await ocellusPlan('--task', 'test-fruit', '--device-class', 'test-scout');
    expect(r.code).toBe(0);
    expect(r.out).toMatch(/^plan for task test-fruit on test-scout: \d+ candidates evaluated, \d+ on the front/);
    expect(r.out).toMatch(/#\s+model\s+focus m\s+f\/\s+exposure µs/);
    expect(r.out).toMatch(/\n1\s+test-(small|wide)\s+0\.48\s/);
    expect(r.out).toMatch(/skipped test-half: model test-half is fp16/);
    expect(r.out).toMatch(/one unit in a safe state/);
  });

  it('prints the plan as JSON with --json', async () => {
    const r = await ocellusPlan('--task', 'test-fruit', '--device-class', 'test-scout', '--models', 'test-small', '--json');
    expect(r.code).toBe(0);
    const data = JSON.parse(r.out);
    expect(data.front.length).toBeGreaterThan(0);
    expect(data.searched.modelIds).toEqual(['test-small']);
    expect(data.front.every((c: { modelId: string }) => c.modelId === 'test-small')).toBe(true);
  });

  it('exits 1 and names the binding constraints when nothing is feasible', async () => {
    const r = await ocellusPlan('--task', 'test-tight', '--device-class', 'test-scout');
    expect(r.code).toBe(1);
    expect(r.out).toMatch(/no candidate meets every check/);
    expect(r.out).toMatch(/binding constraints: latency \(\d+\)/);
    expect(r.out).toMatch(/near miss 1: .*\n\s+FAIL\s+latency\s+end-to-end latency/);
  });

  it('exits 2 naming what is wrong: missing flag, unknown task, unknown model, bad granule', async () => {
    const missing = await ocellusPlan('--device-class', 'test-scout');
    expect([missing.code, missing.err]).toEqual([2, expect.stringMatching(/^error: missing --task/)]);
    const task = await ocellusPlan('--task', 'nope', '--device-class', 'test-scout');
    expect([task.code, task.err]).toEqual([2, expect.stringMatching(/--task: task 'nope' not found in \./)]);
    const model = await ocellusPlan('--task', 'test-fruit', '--device-class', 'test-scout', '--models', 'test-small,ghost');
    expect([model.code, model.err]).toEqual([2, expect.stringMatching(/--models: model 'ghost' not found/)]);
    const granule = await ocellusPlan('--task', 'test-fruit', '--device-class', 'test-scout', '--granule-kib', '0');
    expect([granule.code, granule.err]).toEqual([2, expect.stringMatching(/--granule-kib must be greater than 0/)]);
  });

  it('saves a chosen candidate as a profile that `ocellus check` passes, and never overwrites a file', async () => {
    const file = join(dir, 'planned.json');
    const r = await ocellusPlan('--task', 'test-fruit', '--device-class', 'test-scout', '--save-as', 'planned-fruit', '--out', 'planned.json', '--pick', '1');
    expect(r.code).toBe(0);
    expect(r.out).toMatch(/saved candidate 1 as profile planned-fruit in planned\.json/);
    const saved = JSON.parse(readFileSync(file, 'utf8'));
    expect(saved).toMatchObject({ kind: 'profile', id: 'planned-fruit', taskId: 'test-fruit', deviceClassId: 'test-scout', demoData: true });

    const io = captureIo(dir);
    expect(await check(['.'], io)).toBe(0);
    expect(io.out()).toMatch(/1 profiles: 1 pass/);

    const before = readFileSync(file, 'utf8');
    const again = await ocellusPlan('--task', 'test-fruit', '--device-class', 'test-scout', '--save-as', 'other', '--out', 'planned.json');
    expect([again.code, again.err]).toEqual([2, expect.stringMatching(/--out planned\.json already exists/)]);
    expect(readFileSync(file, 'utf8')).toBe(before);
  });

  it('refuses --pick beyond the front and writes nothing', async () => {
    const r = await ocellusPlan('--task', 'test-fruit', '--device-class', 'test-scout', '--save-as', 'p2', '--out', 'p2.json', '--pick', '999');
    expect(r.code).toBe(2);
    expect(r.err).toMatch(/--pick 999: the front has \d+ candidates/);
    expect(existsSync(join(dir, 'p2.json'))).toBe(false);
  });
});
