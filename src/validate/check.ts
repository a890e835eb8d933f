import type { Check, CheckCode, CheckStatus } from '../schema/report.js';

/** Build one check; every figure carries its unit. */
export function makeCheck(
  code: CheckCode,
  status: CheckStatus,
  actual: number | null,
  limit: number | null,
  unit: string,
  path: string,
  message: string,
): Check {
  return { code, status, actual: finiteOrNull(actual), limit: finiteOrNull(limit), unit, path, message };
}

/** Reports are JSON: an infinite or missing figure is written as null, and the message says what it was. */
function finiteOrNull(v: number | null): number | null {
  return v !== null && Number.isFinite(v) ? v : null;
}

/** A number for a message: three significant figures or so, never exponent notation. */
export function fmt(v: number): string {
  if (Number.isNaN(v)) return 'NaN';
  if (!Number.isFinite(v)) return v > 0 ? 'infinity' : '-infinity';
  const a = Math.abs(v);
  if (a === 0) return '0';
  if (a >= 100) return v.toFixed(0);
  if (a >= 10) return v.toFixed(1);
  if (a >= 1) return v.toFixed(2);
  return String(Number(v.toPrecision(3)));
}

/**
 * Compare against an upper limit. `limitText` names the limit with "{}" where the limit and unit go,
 * e.g. "the {} the model tolerates" → "exceeds the 2.00 px the model tolerates by 1.10 px".
 */
export function againstMax(actual: number, limit: number, unit: string, limitText: string): { ok: boolean; text: string } {
  const u = unit ? ` ${unit}` : '';
  const named = limitText.replace('{}', `${fmt(limit)}${u}`);
  return actual <= limit
    ? { ok: true, text: `is within ${named} (${fmt(limit - actual)}${u} to spare)` }
    : { ok: false, text: `exceeds ${named} by ${fmt(actual - limit)}${u}` };
}

/** Compare against a lower limit, as againstMax: "falls short of the task minimum of 3.00 px by 0.14 px". */
export function againstMin(actual: number, limit: number, unit: string, limitText: string): { ok: boolean; text: string } {
  const u = unit ? ` ${unit}` : '';
  const named = limitText.replace('{}', `${fmt(limit)}${u}`);
  return actual >= limit
    ? { ok: true, text: `meets ${named} (${fmt(actual - limit)}${u} to spare)` }
    : { ok: false, text: `falls short of ${named} by ${fmt(limit - actual)}${u}` };
}
