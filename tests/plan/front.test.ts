import { describe, expect, it } from 'vitest';
import { plan } from '../../src/plan/index.js';
import type { Candidate, PlanOptions, PlanResult } from '../../src/plan/index.js';
import { candidateAt } from '../../src/plan/candidate.js';
import { codesOf } from '../../src/plan/codes.js';
import { newEvaluation, evaluateIndex, candidateCount } from '../../src/plan/evaluator.js';
import { resolveOptions, searchAxes } from '../../src/plan/search-space.js';
import { buildTables } from '../../src/plan/tables.js';
import { analyzeNetwork } from '../../src/physics/network-cost.js';
import { validate } from '../../src/validate/index.js';
import type { ValidationReport } from '../../src/validate/index.js';
import { testCandidates, testDeviceClass, testTask } from '../support/plan-fixtures.js';

// A grid small enough to run every candidate through the real validator.
const SMALL_GRID: PlanOptions = { exposuresUs: [200, 800, 3200, 12800], analogGains: [1, 4], focusSpread: [0.1] };

interface Judged {
  key: string;
  feasible: boolean;
  energy: number;
  accuracy: number;
  latency: number;
  report: ValidationReport;
}

const keyOf = (modelId: string, camera: object, memory: object) => JSON.stringify([modelId, camera, memory]);

/** Every candidate of the grid the planner searched, in its order, judged by validate() alone. */
function bruteForce(result: PlanResult): Judged[] {
  const s = result.searched;
  const out: Judged[] = [];
  for (const modelId of s.modelIds) {
    const c = testCandidates.find((x) => x.model.id === modelId)!;
    for (const memory of s.memoryPartitions)
      for (const exposureUs of s.exposuresUs)
        for (const fNumber of s.fNumbers)
          for (const focusDistanceM of s.focusDistancesM)
            for (const analogGain of s.analogGains) {
              const camera = { focusDistanceM, fNumber, exposureUs, analogGain };
              const profile = { id: 'brute', taskId: testTask.id, deviceClassId: testDeviceClass.id, modelId, camera, memory };
              const report = validate({ profile, task: testTask, deviceClass: testDeviceClass, model: c.model, network: c.network });
              out.push({
                key: keyOf(modelId, camera, memory),
                feasible: report.status !== 'fail',
                energy: report.figures.energy!.totalMj,
                accuracy: report.figures.predictedAccuracy ?? 0,
                latency: report.figures.latency!.totalMs,
                report,
              });
            }
  }
  return out;
}

/** Plain O(n²) Pareto front by the textbook definition (Deb 2001, §2.4); of exact ties the first is kept. */
function naiveFront(points: Judged[]): Judged[] {
  const dominates = (a: Judged, b: Judged) =>
    a.energy <= b.energy && a.accuracy >= b.accuracy && a.latency <= b.latency &&
    (a.energy < b.energy || a.accuracy > b.accuracy || a.latency < b.latency);
  const same = (a: Judged, b: Judged) => a.energy === b.energy && a.accuracy === b.accuracy && a.latency === b.latency;
  return points.filter((p, i) => points.every((q, j) => j === i || (!dominates(q, p) && !(same(q, p) && j < i))));
}

const candidateKey = (c: Candidate) => keyOf(c.modelId, c.camera, c.memory);

describe('planner front against a brute-force enumeration through validate()', () => {
  const result = plan({ task: testTask, deviceClass: testDeviceClass, candidates: testCandidates, options: SMALL_GRID });
  const all = bruteForce(result);
  const feasible = all.filter((j) => j.feasible);

  it('evaluates the whole grid: 2 models × 5 partitions × 4 exposures × 4 stops × 3 focus × 2 gains', () => {
    expect(result.evaluated).toBe(2 * 5 * 4 * 4 * 3 * 2);
    expect(all.length).toBe(result.evaluated);
  });

  it('finds some feasible and some infeasible candidates, so the comparison means something', () => {
    expect(feasible.length).toBeGreaterThan(1);
    expect(feasible.length).toBeLessThan(all.length);
  });

  it('returns exactly the non-dominated feasible set of the brute force, with the same figures', () => {
    const expected = naiveFront(feasible);
    expect(result.front.map(candidateKey).sort()).toEqual(expected.map((j) => j.key).sort());
    for (const c of result.front) {
      const j = expected.find((x) => x.key === candidateKey(c))!;
      expect(c.energyMjPerFrame).toBeCloseTo(j.energy, 12);
      expect(c.latencyMs).toBeCloseTo(j.latency, 12);
      expect(c.predictedAccuracy ?? 0).toBeCloseTo(j.accuracy, 12);
    }
    expect(result.front.length).toBeGreaterThanOrEqual(2);
    expect(new Set(result.front.map((c) => c.modelId)).size).toBe(2);
  });

  it('sorts the front by energy per frame', () => {
    const energies = result.front.map((c) => c.energyMjPerFrame);
    expect(energies).toEqual([...energies].sort((a, b) => a - b));
  });

  it('counts failures per check code as the validator does over the whole grid', () => {
    const counts: Record<string, number> = {};
    for (const j of all) for (const c of j.report.checks) if (c.status === 'fail') counts[c.code] = (counts[c.code] ?? 0) + 1;
    expect(result.failCounts).toEqual(counts);
    const byCount = Object.keys(counts).sort((a, b) => counts[b]! - counts[a]!);
    expect(result.failCounts[result.bindingConstraints[0]!]).toBe(counts[byCount[0]!]);
  });

  it('confirms every front member with validate(): no failing check', () => {
    expect(result.unconfirmed).toBe(0);
    for (const c of result.front) {
      const { model, network } = testCandidates.find((x) => x.model.id === c.modelId)!;
      const profile = { id: 'front', taskId: testTask.id, deviceClassId: testDeviceClass.id, modelId: c.modelId, camera: c.camera, memory: c.memory };
      const report = validate({ profile, task: testTask, deviceClass: testDeviceClass, model, network });
      expect(report.checks.filter((k) => k.status === 'fail')).toEqual([]);
    }
  });
});

describe('fast evaluator against validate() on every candidate of the grid', () => {
  it('agrees on feasibility, failing codes, energy, latency, accuracy and worst blur', () => {
    const resolved = resolveOptions(SMALL_GRID);
    const models = testCandidates.map((c) => ({ ...c, analysis: analyzeNetwork(c.network) }));
    const axes = { modelIds: models.map((m) => m.model.id), ...searchAxes(testTask, testDeviceClass, SMALL_GRID, resolved) };
    const tables = buildTables(testTask, testDeviceClass, models, axes);
    const out = newEvaluation();
    let disagreements = 0;
    for (let i = 0; i < candidateCount(tables); i++) {
      evaluateIndex(tables, i, out);
      const c = candidateAt(tables, i);
      const { model, network } = testCandidates.find((x) => x.model.id === c.modelId)!;
      const profile = { id: 'x', taskId: testTask.id, deviceClassId: testDeviceClass.id, modelId: c.modelId, camera: c.camera, memory: c.memory };
      const report = validate({ profile, task: testTask, deviceClass: testDeviceClass, model, network });
      const failing = report.checks.filter((k) => k.status === 'fail').map((k) => k.code).sort();
      const worst = Math.max(...report.figures.blurCurve.map((p) => p.totalPx));
      const same =
        JSON.stringify([...codesOf(out.mask)].sort()) === JSON.stringify(failing) &&
        c.energyMjPerFrame === report.figures.energy!.totalMj &&
        c.latencyMs === report.figures.latency!.totalMs &&
        c.predictedAccuracy === report.figures.predictedAccuracy &&
        c.worstBlurPx === worst;
      if (!same) disagreements++;
    }
    expect(disagreements).toBe(0);
  });
});
