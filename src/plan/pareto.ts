/**
 * Pareto front over three objectives: energy per frame (lower is better), predicted accuracy (higher is
 * better) and latency (lower is better). A point dominates another when it is no worse in every objective
 * and better in at least one (Deb, "Multi-Objective Optimization Using Evolutionary Algorithms", 2001, §2.4).
 * Values closer than a relative tolerance count as equal, so that two evaluations of the same candidate that
 * differ in the last bits never split a tie; among equal points the first one seen is kept.
 */

export interface Objectives {
  energyMjPerFrame: number;
  predictedAccuracy: number;
  latencyMs: number;
}

/** Relative tolerance under which two objective values count as equal. */
export const OBJECTIVE_TOLERANCE = 1e-9;

function lessThan(a: number, b: number): boolean {
  return a < b - OBJECTIVE_TOLERANCE * Math.max(1, Math.abs(a), Math.abs(b));
}

/** −1 when a is better, 1 when b is better, 0 when neither dominates; 2 when they are equal in every objective. */
export function compareObjectives(a: Objectives, b: Objectives): -1 | 0 | 1 | 2 {
  return compareRaw(a.energyMjPerFrame, a.predictedAccuracy, a.latencyMs, b.energyMjPerFrame, b.predictedAccuracy, b.latencyMs);
}

/** The same comparison on plain numbers, for the allocation-free inner loop. */
export function compareRaw(ea: number, aa: number, la: number, eb: number, ab: number, lb: number): -1 | 0 | 1 | 2 {
  const aBetter = lessThan(ea, eb) || lessThan(ab, aa) || lessThan(la, lb);
  const bBetter = lessThan(eb, ea) || lessThan(aa, ab) || lessThan(lb, la);
  if (aBetter && bBetter) return 0;
  if (aBetter) return -1;
  if (bBetter) return 1;
  return 2;
}

/**
 * A growing non-dominated archive of candidate indices with their objectives, kept in flat arrays.
 * `offer` returns whether the point entered the front; points it dominates leave.
 */
export class ParetoArchive {
  private energy: number[] = [];
  private accuracy: number[] = [];
  private latency: number[] = [];
  private ids: number[] = [];

  get size(): number {
    return this.ids.length;
  }

  offer(id: number, energyMjPerFrame: number, predictedAccuracy: number, latencyMs: number): boolean {
    const n = this.ids.length;
    for (let i = 0; i < n; i++) {
      const c = compareRaw(this.energy[i]!, this.accuracy[i]!, this.latency[i]!, energyMjPerFrame, predictedAccuracy, latencyMs);
      if (c === -1 || c === 2) return false;
    }
    let w = 0;
    for (let i = 0; i < n; i++) {
      const c = compareRaw(energyMjPerFrame, predictedAccuracy, latencyMs, this.energy[i]!, this.accuracy[i]!, this.latency[i]!);
      if (c === -1) continue;
      this.energy[w] = this.energy[i]!;
      this.accuracy[w] = this.accuracy[i]!;
      this.latency[w] = this.latency[i]!;
      this.ids[w] = this.ids[i]!;
      w++;
    }
    this.energy.length = this.accuracy.length = this.latency.length = this.ids.length = w;
    this.energy.push(energyMjPerFrame);
    this.accuracy.push(predictedAccuracy);
    this.latency.push(latencyMs);
    this.ids.push(id);
    return true;
  }

  /** Ids on the front, in the order they entered it. */
  members(): number[] {
    return this.ids.slice();
  }
}

/**
 * The non-dominated subset of a list by the plain O(n²) definition; among points equal in every
 * objective the earliest is kept. Used to check the archive and by callers with short lists.
 */
export function paretoFront<T extends Objectives>(points: readonly T[]): T[] {
  return points.filter((p, i) =>
    points.every((q, j) => {
      if (i === j) return true;
      const c = compareObjectives(q, p);
      return c !== -1 && !(c === 2 && j < i);
    }),
  );
}
