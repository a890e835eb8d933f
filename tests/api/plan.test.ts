/**
 * POST /api/v1/plan in-process against the greenhouse demo documents (demo data), pushed through the API
 * as `ocellus push` does. The planner's own computations are tested in plan-*.test.ts; here: the route
 * finds the stored documents, answers what plan() answers over the same files, every front member passes
 * the validator the API itself runs, and bad requests are refused naming the field.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { findDocument, loadCatalog, type Catalog } from '../../src/document-files/index.js';
import { inDependencyOrder } from '../../src/api-client/push-documents.js';
import { DEMO_CATALOG_DIR } from '../../src/demo/scenario.js';
import { candidateToProfile, plan, type Candidate, type PlanResult } from '../../src/plan/index.js';
import type { Check } from '../../src/schema/index.js';
import { createHarness, removeDir, tempDataDir, type Harness } from '../support/api-fixtures.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';

interface PlanAnswer extends PlanResult {
  calibration: unknown;
  refs: { task: { id: string; version: number }; deviceClass: { id: string; version: number }; models: Array<{ model: { id: string } }> };
}

let h: Harness;
let catalog: Catalog;

beforeAll(async () => {
  h = createHarness(tempDataDir());
  catalog = await loadCatalog([DEMO_CATALOG_DIR]);
  expect(catalog.issues).toEqual([]);
  for (const doc of inDependencyOrder(catalog.documents)) {
    if (doc.kind === 'profile') continue;
    const collection = { 'device-class': 'device-classes', network: 'networks', model: 'models', task: 'tasks' }[doc.kind];
    const res = await h.call('POST', `/api/v1/${collection}`, { body: doc.value });
    expect(res.status, `${doc.kind} ${doc.value.id}`).toBe(201);
  }
});
afterAll(() => {
  h.closeStore();
  removeDir(h.dir);
});

const planCall = (body: unknown, token: string | null = h.tokens.engineer) => h.call('POST', '/api/v1/plan', { body, token });

async function validateCandidate(c: Candidate, taskId: string, deviceClassId: string): Promise<Check[]> {
  const profile = candidateToProfile(c, { id: 'planned-check', taskId, deviceClassId, demoData: true });
  const res = await h.call('POST', '/api/v1/validate', { body: profile, token: h.tokens.viewer });
  expect(res.status).toBe(200);
  return ((await res.json()) as { report: { checks: Check[] } }).report.checks;
}

describe('POST /api/v1/plan', () => {
  it('fruit counting on gh-scout-a: the front plan() finds over the same files, each member passing /validate (demo data)', async () => {
    const res = await planCall({ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a' });
    expect(res.status).toBe(200);
    const answer = (await res.json()) as PlanAnswer;
    expect(answer.front.length).toBeGreaterThan(0);
    // Without modelIds: the stored models measured for the task and of the accelerator's precision (int8 for
    // gh-scout-a), none skipped: the row-guidance and leaf models were not measured for fruit counting.
    expect(answer.searched.modelIds.sort()).toEqual(['fruit-finder-a']);
    expect(answer.skipped).toEqual([]);
    expect(answer.calibration).toBeNull();
    expect(answer.refs.task).toEqual({ id: 'fruit-counting', version: 1 });
    expect(answer.refs.deviceClass).toEqual({ id: 'gh-scout-a', version: 1 });

    const task = findDocument(catalog, 'task', 'fruit-counting')!;
    const deviceClass = findDocument(catalog, 'device-class', 'gh-scout-a')!;
    const candidates = answer.searched.modelIds.map((id) => {
      const model = findDocument(catalog, 'model', id)!;
      return { model, network: findDocument(catalog, 'network', model.networkId)! };
    });
    const direct = JSON.parse(JSON.stringify(plan({ task, deviceClass, candidates }))) as PlanResult;
    expect(answer.front).toEqual(direct.front);
    expect(answer.evaluated).toBe(direct.evaluated);

    for (const c of answer.front) {
      const checks = await validateCandidate(c, 'fruit-counting', 'gh-scout-a');
      expect(checks.filter((k) => k.status === 'fail'), JSON.stringify(c)).toEqual([]);
      // The figures the planner ranks by are the validator's own (demo data, same documents).
      expect(c.predictedAccuracy).toBeGreaterThanOrEqual(task.minAccuracy);
      expect(c.latencyMs).toBeLessThanOrEqual(task.latencyBudgetMs);
    }
  });

  it('modelIds narrows the search; near misses come back on request with their failing checks', async () => {
    const res = await planCall({ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', modelIds: ['fruit-finder-a'], options: { granuleKib: 128, nearMisses: 3 } });
    expect(res.status).toBe(200);
    const answer = (await res.json()) as PlanAnswer;
    expect(answer.searched.modelIds).toEqual(['fruit-finder-a']);
    expect(answer.front.every((c) => c.modelId === 'fruit-finder-a')).toBe(true);
    // 2048 KiB of SRAM in 128 KiB steps: weight buffers 0, 128, … 2048, i.e. 17 partitions (gh-scout-a, demo data).
    expect(answer.searched.memoryPartitions).toHaveLength(17);
    expect(answer.nearMisses.length).toBeGreaterThan(0);
    for (const n of answer.nearMisses) expect(n.failing.length).toBeGreaterThan(0);
  });

  it('an impossible task gives an empty front with the binding constraints and near misses', async () => {
    // Demo data: fruit counting with a 5 ms latency budget. The frame budget is exposure + readout + ISP +
    // inference (README, "Frame budget"); gh-scout-a's readout (9 ms) and ISP (3 ms) alone exceed it.
    const base = findDocument(catalog, 'task', 'fruit-counting')!;
    const created = await h.call('POST', '/api/v1/tasks', { body: { ...base, id: 'fruit-counting-impossible', name: 'Fruit counting in 5 ms (demo data)', latencyBudgetMs: 5 } });
    expect(created.status).toBe(201);
    // The detector, measured for this task too (a new version of the model document).
    const finder = findDocument(catalog, 'model', 'fruit-finder-a')!;
    const measured = await h.call('PUT', '/api/v1/models/fruit-finder-a', { body: { ...finder, measuredForTaskIds: [...finder.measuredForTaskIds!, 'fruit-counting-impossible'] } });
    expect(measured.status, await measured.clone().text()).toBeLessThan(300);
    const res = await planCall({ taskId: 'fruit-counting-impossible', deviceClassId: 'gh-scout-a' });
    expect(res.status).toBe(200);
    const answer = (await res.json()) as PlanAnswer;
    expect(answer.front).toEqual([]);
    expect(answer.evaluated).toBeGreaterThan(0);
    expect(answer.bindingConstraints).toContain('latency');
    expect(answer.failCounts.latency).toBe(answer.evaluated);
    expect(answer.nearMisses.length).toBeGreaterThan(0);
    for (const n of answer.nearMisses) expect(n.failing.map((c) => c.code)).toContain('latency');
  });

  it('a bad body is a 400 naming the field; missing references are 400s naming the reference', async () => {
    const cases: Array<[unknown, string]> = [
      [{ taskId: 'fruit-counting' }, 'deviceClassId'],
      [{ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', options: { granuleKib: 0 } }, 'options.granuleKib'],
      [{ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', options: { nearMisses: -1 } }, 'options.nearMisses'],
      [{ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', modelIds: [] }, 'modelIds'],
      [{ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', extra: 1 }, '(root)'],
      [{ taskId: 'no-such-task', deviceClassId: 'gh-scout-a' }, 'taskId'],
      [{ taskId: 'fruit-counting', deviceClassId: 'no-such-class' }, 'deviceClassId'],
      [{ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', modelIds: ['fruit-finder-a', 'no-such-model'] }, 'modelIds[1]'],
    ];
    for (const [body, path] of cases) {
      const res = await planCall(body);
      expect(res.status, JSON.stringify(body)).toBe(400);
      const err = (await res.json()) as { error: string; issues: Array<{ path: string; message: string }> };
      expect(typeof err.error).toBe('string');
      expect(err.issues.map((i) => i.path), JSON.stringify(body)).toContain(path);
    }
  });

  it('is for engineers and above: a viewer gets 403, no token 401, an operator 200', async () => {
    const body = { taskId: 'low-light-patrol', deviceClassId: 'gh-scout-a', modelIds: ['row-guide-a'] };
    expect((await planCall(body, h.tokens.viewer)).status).toBe(403);
    expect((await planCall(body, null)).status).toBe(401);
    expect((await planCall(body, h.tokens.operator)).status).toBe(200);
  });

  it('with enough telemetry from the class, the search scales inference by its calibration, as plan() does with the same factors', async () => {
    // A release of fruit-counting-a for gh-scout-a, so telemetry has a prediction to be measured against (demo data).
    const profile = findDocument(catalog, 'profile', 'fruit-counting-a')!;
    expect((await h.call('POST', '/api/v1/profiles', { body: profile })).status).toBe(201);
    const weights = readFileSync(join(DEMO_CATALOG_DIR, 'weights', 'fruit-finder-a.bin'));
    expect((await h.call('PUT', '/api/v1/models/fruit-finder-a/weights', { body: weights })).status).toBe(201);
    const made = await h.call('POST', '/api/v1/releases', {
      body: { deviceClassId: 'gh-scout-a', tasks: { 'fruit-counting': { profileId: 'fruit-counting-a', revision: 1 } }, defaultTask: 'fruit-counting' },
    });
    expect(made.status).toBe(201);
    const release = ((await made.json()) as { release: { id: string; tasks: Record<string, { predicted: { inferenceMs: number; inferenceMj: number } }> } }).release;
    const predicted = release.tasks['fruit-counting']!.predicted;

    // Three units, eight windows of 50 frames each: 24 windows and 1,200 frames, over the class minimum
    // (CALIBRATION_MINIMUM: 20 windows, 1,000 frames, 3 devices). Every unit measures 1.25 × the predicted
    // time and 0.9 × the energy, so the least-squares factors through the origin are exactly those.
    const insert = sqlHandle(h.store).prepare('INSERT INTO device_events (device_id, seq, ts, type, event, received_at) VALUES (?, ?, ?, ?, ?, ?)');
    for (const unit of ['gh-a-cal-1', 'gh-a-cal-2', 'gh-a-cal-3']) {
      expect((await h.call('POST', '/api/v1/devices', { body: { id: unit, deviceClassId: 'gh-scout-a', tags: [] } })).status).toBe(201);
      for (let seq = 1; seq <= 8; seq++) {
        const ts = new Date(Date.UTC(2026, 2, 1, 8, seq)).toISOString();
        const event = {
          type: 'telemetry', task: 'fruit-counting', profileId: 'fruit-counting-a', profileRevision: 1, releaseId: release.id, frames: 50, windowS: 5,
          inferenceMsMean: 1.25 * predicted.inferenceMs, inferenceMjMean: 0.9 * predicted.inferenceMj, frameEnergyMjMean: 0.2,
        };
        insert.run(unit, seq, ts, 'telemetry', JSON.stringify({ seq, ts, ...event }), ts);
      }
    }

    const res = await planCall({ taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', modelIds: ['fruit-finder-a'] });
    expect(res.status).toBe(200);
    const answer = (await res.json()) as PlanAnswer & { calibration: { latencyFactor: number; energyFactor: number; samples: number } };
    expect(answer.calibration.latencyFactor).toBeCloseTo(1.25, 9);
    expect(answer.calibration.energyFactor).toBeCloseTo(0.9, 9);
    expect(answer.calibration.samples).toBe(24);

    const task = findDocument(catalog, 'task', 'fruit-counting')!;
    const deviceClass = findDocument(catalog, 'device-class', 'gh-scout-a')!;
    const model = findDocument(catalog, 'model', 'fruit-finder-a')!;
    const candidates = [{ model, network: findDocument(catalog, 'network', model.networkId)! }];
    const calibrated = JSON.parse(JSON.stringify(plan({ task, deviceClass, candidates, options: { calibration: answer.calibration } }))) as PlanResult;
    const plain = plan({ task, deviceClass, candidates });
    expect(answer.front).toEqual(calibrated.front);
    // Inference is a sliver of this task's 13 ms frame (demo data), but the calibrated figures must still differ.
    expect(answer.front[0]!.latencyMs).not.toBeCloseTo(plain.front[0]!.latencyMs, 6);
  });
});
