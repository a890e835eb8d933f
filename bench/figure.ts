/** One measured figure of a bench part, printed as one JSON line. */
export interface BenchFigure {
  name: string;
  value: number;
  unit: string;
  target: number;
  /** A bound the value must not cross even when the target is missed, where a part has one. */
  floor?: number;
  /** value ÷ target, where that reads well. */
  ratio?: number;
  ok: boolean;
}

/** A bench part: measures and returns its figures. */
export type BenchPart = () => Promise<BenchFigure[]>;

export function median(values: number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const mid = sorted.length >> 1;
  return sorted.length % 2 ? sorted[mid]! : (sorted[mid - 1]! + sorted[mid]!) / 2;
}
