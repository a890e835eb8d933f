/**
 * One pass over every candidate of the grid: feasible ones are offered to the Pareto archive, infeasible
 * ones are tallied by the codes they fail, and the best infeasible candidate of each (model, failing-code
 * set) is kept as a possible near miss. Nothing is allocated per candidate.
 */
import { MASK_COUNT, bitCount } from './codes.js';
import { evaluateAt, newEvaluation } from './evaluator.js';
import { ParetoArchive } from './pareto.js';
import type { PlanTables } from './tables.js';

export interface SweepResult {
  /** Packed indices of the feasible, non-dominated candidates. */
  front: number[];
  /** Candidates failing each exact set of codes, by mask (index 0: feasible). */
  maskCounts: Float64Array;
  /** Packed indices of the best infeasible candidates, fewest failed checks and smallest overshoot first. */
  nearMisses: number[];
  evaluated: number;
}

/** The rank of an infeasible candidate: fewer failed checks first, then the smaller summed overshoot. */
const rankOf = (failed: number, overshoot: number) => failed * 1_000 + overshoot;

/**
 * Sweep the grid. `excluded` candidates are treated as infeasible without being ranked (the planner uses it
 * for any candidate the validator refused to confirm). `nearMissLimit` bounds the near misses returned.
 */
export function sweep(t: PlanTables, nearMissLimit: number, excluded: ReadonlySet<number> = new Set()): SweepResult {
  const archive = new ParetoArchive();
  const maskCounts = new Float64Array(MASK_COUNT);
  const popcount = new Uint8Array(MASK_COUNT);
  for (let k = 0; k < MASK_COUNT; k++) popcount[k] = bitCount(k);
  const bestRank = new Float64Array(t.M * MASK_COUNT).fill(Infinity);
  const bestIndex = new Float64Array(t.M * MASK_COUNT).fill(-1);
  const out = newEvaluation();
  const checkExcluded = excluded.size > 0;
  let index = 0;
  for (let m = 0; m < t.M; m++) {
    for (let p = 0; p < t.P; p++) {
      for (let e = 0; e < t.E; e++) {
        for (let f = 0; f < t.F; f++) {
          for (let s = 0; s < t.S; s++) {
            for (let g = 0; g < t.G; g++, index++) {
              evaluateAt(t, m, p, e, f, s, g, out);
              const mask = out.mask;
              maskCounts[mask]!++;
              if (mask === 0) {
                if (checkExcluded && excluded.has(index)) continue;
                const accuracy = Number.isNaN(out.predictedAccuracy) ? 0 : out.predictedAccuracy;
                archive.offer(index, out.energyMjPerFrame, accuracy, out.latencyMs);
                continue;
              }
              const key = m * MASK_COUNT + mask;
              const rank = rankOf(popcount[mask]!, out.overshoot);
              if (rank < bestRank[key]!) {
                bestRank[key] = rank;
                bestIndex[key] = index;
              }
            }
          }
        }
      }
    }
  }
  const keys: number[] = [];
  for (let k = 0; k < bestIndex.length; k++) if (bestIndex[k]! >= 0) keys.push(k);
  keys.sort((a, b) => bestRank[a]! - bestRank[b]! || bestIndex[a]! - bestIndex[b]!);
  return {
    front: archive.members(),
    maskCounts,
    nearMisses: keys.slice(0, nearMissLimit).map((k) => bestIndex[k]!),
    evaluated: index,
  };
}
