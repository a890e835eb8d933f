import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { findDocument, loadCatalog } from '../../src/document-files/index.js';
import { candidateToProfile, plan } from '../../src/plan/index.js';
import type { PlanInput } from '../../src/plan/index.js';
import { InputError, profileSchema } from '../../src/schema/index.js';
import { validate } from '../../src/validate/index.js';
import { halfModel, smallModel, testCandidates, testDeviceClass, testNetwork, testTask } from '../support/plan-fixtures.js';

const SMALL_GRID = { exposuresUs: [200, 800, 3200], analogGains: [1, 4] };

function inputIssues(input: PlanInput): { path: string; message: string }[] {
  try {
    plan(input);
  } catch (e) {
    if (e instanceof InputError) return e.issues;
    throw e;
  }
  throw new Error('plan accepted the input');
}

describe('a task no candidate can meet', () => {
  // Readout (5 ms) and ISP (2 ms) alone exceed a 4 ms latency budget, whatever the settings.
  const task = { ...testTask, latencyBudgetMs: 4 };
  const result = plan({ task, deviceClass: testDeviceClass, candidates: testCandidates, options: SMALL_GRID });

  it('returns an empty front', () => {
    expect(result.front).toEqual([]);
    expect(result.evaluated).toBeGreaterThan(0);
  });

  it('names latency as the binding constraint: every candidate fails it', () => {
    expect(result.bindingConstraints[0]).toBe('latency');
    expect(result.failCounts.latency).toBe(result.evaluated);
  });

  it("returns near misses with the validator's failing checks, latency among them", () => {
    expect(result.nearMisses.length).toBeGreaterThan(0);
    for (const n of result.nearMisses) {
      const latency = n.failing.find((c) => c.code === 'latency')!;
      expect(latency.status).toBe('fail');
      expect(latency.limit).toBe(4);
      expect(latency.actual!).toBeGreaterThan(4);
      expect(latency.message).toMatch(/exceeds the latency budget.*4\.00 ms/);
    }
    // The best near misses fail nothing but latency.
    expect(result.nearMisses[0]!.failing.map((c) => c.code)).toEqual(['latency']);
  });
});

describe('models the accelerator cannot run', () => {
  it('are skipped with the reason, and the rest are searched', () => {
    const result = plan({ task: testTask, deviceClass: testDeviceClass, candidates: [...testCandidates, { model: halfModel, network: testNetwork }], options: SMALL_GRID });
    expect(result.skipped).toEqual([{ modelId: 'test-half', reason: 'model test-half is fp16 but the accelerator of test-scout runs int8' }]);
    expect(result.searched.modelIds).toEqual(['test-small', 'test-wide']);
    expect(result.front.length).toBeGreaterThan(0);
  });

  it('leave an empty front whose binding constraint is the precision when no model is left', () => {
    const result = plan({ task: testTask, deviceClass: testDeviceClass, candidates: [{ model: halfModel, network: testNetwork }], options: SMALL_GRID });
    expect(result.front).toEqual([]);
    expect(result.evaluated).toBe(0);
    expect(result.bindingConstraints).toEqual(['model-precision']);
  });

  it('include a model paired with a network other than the one it names', () => {
    const result = plan({ task: testTask, deviceClass: testDeviceClass, candidates: [{ model: { ...smallModel, networkId: 'other-net' }, network: testNetwork }], options: SMALL_GRID });
    expect(result.skipped[0]!.reason).toMatch(/names network 'other-net' but the network given is 'test-net-96'/);
  });
});

describe('near misses on request', () => {
  it('come back beside a non-empty front when asked for, each failing at least one check', () => {
    const result = plan({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: { ...SMALL_GRID, nearMisses: 2 } });
    expect(result.front.length).toBeGreaterThan(0);
    expect(result.nearMisses).toHaveLength(2);
    for (const n of result.nearMisses) expect(n.failing.length).toBeGreaterThan(0);
  });

  it('are not returned beside a non-empty front by default', () => {
    expect(plan({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: SMALL_GRID }).nearMisses).toEqual([]);
  });
});

describe('bad input', () => {
  it('names the field of a bad task', () => {
    const issues = inputIssues({ task: { ...testTask, farDistanceM: -1 }, deviceClass: testDeviceClass, candidates: testCandidates });
    expect(issues.map((i) => i.path)).toContain('task.farDistanceM');
  });

  it('names the model of a bad candidate by its place in the list', () => {
    const issues = inputIssues({ task: testTask, deviceClass: testDeviceClass, candidates: [testCandidates[0]!, { model: { ...smallModel, precision: 'int4' as 'int8' }, network: testNetwork }] });
    expect(issues.map((i) => i.path)).toEqual(['candidates[1].model.precision']);
  });

  it('refuses an empty list of candidates', () => {
    expect(inputIssues({ task: testTask, deviceClass: testDeviceClass, candidates: [] })).toEqual([{ path: 'candidates', message: 'must list at least one {model, network} pair' }]);
  });

  it('refuses a zero memory granule and f-numbers the lens does not have', () => {
    expect(inputIssues({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: { granuleKib: 0 } })[0]!.path).toBe('options.granuleKib');
    const stops = inputIssues({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: { fNumbers: [3.3] } });
    expect(stops[0]!.path).toBe('options.fNumbers');
    expect(stops[0]!.message).toMatch(/none of these is a stop of the lens \(2, 2\.8, 4, 8\)/);
  });

  it('refuses a grid larger than the limit, saying how large it is', () => {
    const issues = inputIssues({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: { ...SMALL_GRID, maxCandidates: 100 } });
    expect(issues[0]!.path).toBe('options');
    expect(issues[0]!.message).toMatch(/more than the limit 100/);
  });
});

describe('inference calibration', () => {
  it('is applied as the validator applies it: front figures match validate() with the same calibration', () => {
    const calibration = { latencyFactor: 3, energyFactor: 2, samples: 10 };
    const plain = plan({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: SMALL_GRID });
    const result = plan({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: { ...SMALL_GRID, calibration } });
    expect(result.unconfirmed).toBe(0);
    expect(result.front[0]!.energyMjPerFrame).toBeGreaterThan(plain.front[0]!.energyMjPerFrame);
    for (const c of result.front) {
      const m = testCandidates.find((x) => x.model.id === c.modelId)!;
      const profile = candidateToProfile(c, { id: 'cal', taskId: testTask.id, deviceClassId: testDeviceClass.id });
      const report = validate({ profile, task: testTask, deviceClass: testDeviceClass, model: m.model, network: m.network }, { calibration });
      expect(report.status).not.toBe('fail');
      expect(report.figures.energy!.totalMj).toBe(c.energyMjPerFrame);
      expect(report.figures.latency!.totalMs).toBe(c.latencyMs);
    }
  });
});

describe('candidateToProfile', () => {
  it('writes a profile document that parses and passes the validator, with the planning caution in its notes', () => {
    const result = plan({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: SMALL_GRID });
    const chosen = result.front[0]!;
    const profile = candidateToProfile(chosen, { id: 'planned-test', taskId: testTask.id, deviceClassId: testDeviceClass.id, demoData: true });
    expect(profileSchema.parse(profile)).toEqual(profile);
    expect(profile).toMatchObject({ kind: 'profile', id: 'planned-test', demoData: true, modelId: chosen.modelId, camera: chosen.camera, memory: chosen.memory });
    expect(profile.notes).toMatch(/^Demo data\. .*one unit in a safe state.*stages/);
    const c = testCandidates.find((x) => x.model.id === chosen.modelId)!;
    expect(validate({ profile, task: testTask, deviceClass: testDeviceClass, model: c.model, network: c.network }).status).not.toBe('fail');
  });
});

const DEMO = fileURLToPath(new URL('../../profiles/greenhouse-demo', import.meta.url));

describe.skipIf(!existsSync(DEMO))('greenhouse demo data (skipped when profiles/greenhouse-demo is absent)', () => {
  it('every front member of every demo task on every demo device class passes validate()', async () => {
    const catalog = await loadCatalog([DEMO]);
    expect(catalog.issues).toEqual([]);
    const tasks = catalog.documents.flatMap((d) => (d.kind === 'task' ? [d.value] : []));
    const deviceClasses = catalog.documents.flatMap((d) => (d.kind === 'device-class' ? [d.value] : []));
    const candidates = catalog.documents.flatMap((d) => (d.kind === 'model' ? [{ model: d.value, network: findDocument(catalog, 'network', d.value.networkId)! }] : []));
    let checked = 0;
    for (const task of tasks) {
      for (const deviceClass of deviceClasses) {
        const result = plan({ task, deviceClass, candidates, options: { granuleKib: 256 } });
        expect(result.unconfirmed).toBe(0);
        for (const c of result.front) {
          const { model, network } = candidates.find((x) => x.model.id === c.modelId)!;
          const profile = candidateToProfile(c, { id: 'demo-plan', taskId: task.id, deviceClassId: deviceClass.id });
          const report = validate({ profile, task, deviceClass, model, network });
          expect(report.checks.filter((k) => k.status === 'fail')).toEqual([]);
          checked++;
        }
      }
    }
    expect(checked).toBeGreaterThan(0);
  });
});
