/**
 * Wilson score interval for a binomial proportion (Wilson, "Probable inference, the law of succession, and
 * statistical inference", JASA 22, 1927; method 3 of Newcombe, Statistics in Medicine 17, 1998):
 * (p̂ + z²/2n ± z·√(p̂(1−p̂)/n + z²/4n²)) / (1 + z²/n).
 */

/** z for a two-sided 95 % interval (normal quantile 0.975). */
export const Z_95 = 1.959963984540054;

export interface Interval {
  low: number;
  high: number;
}

export function wilsonInterval(successes: number, trials: number, z = Z_95): Interval {
  if (!Number.isInteger(trials) || trials < 1) throw new RangeError(`trials must be a whole number ≥ 1, got ${trials}`);
  if (!(successes >= 0 && successes <= trials)) throw new RangeError(`successes must lie in 0…${trials}, got ${successes}`);
  const p = successes / trials;
  const z2n = (z * z) / trials;
  const centre = (p + z2n / 2) / (1 + z2n);
  const half = (z / (1 + z2n)) * Math.sqrt((p * (1 - p)) / trials + z2n / (4 * trials));
  return { low: Math.max(0, centre - half), high: Math.min(1, centre + half) };
}
