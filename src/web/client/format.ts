import { msToS } from '../../physics/units.js';

/** Three significant figures or so, never exponent notation; em dash for a missing figure. */
export function num(value: number | null | undefined, digits = 3): string {
  if (value === null || value === undefined || Number.isNaN(value)) return '—';
  if (!Number.isFinite(value)) return value > 0 ? '∞' : '−∞';
  const abs = Math.abs(value);
  if (abs >= 10 ** digits) return Math.round(value).toLocaleString('en-GB');
  if (abs === 0) return '0';
  const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(abs)));
  return value.toFixed(Math.min(decimals, 6)).replace(/(\.\d*?)0+$/, '$1').replace(/\.$/, '');
}

/**
 * A focus distance as a person sets it: three significant figures (1.6666… m → 1.67 m, 0.48 m stays 0.48 m),
 * still a number of metres. Finer figures than that are below what a lens's focus can be set to repeatably
 * (common practice), and a long tail of digits reads as false precision.
 */
export function focusDistanceM(valueM: number): number {
  if (!Number.isFinite(valueM) || valueM === 0) return valueM;
  return Number(valueM.toPrecision(3));
}

/** "1.67 m": the focus distance with its unit, at the precision of focusDistanceM. */
export function focusText(valueM: number | null | undefined): string {
  return valueM === null || valueM === undefined || Number.isNaN(valueM) ? '—' : `${num(focusDistanceM(valueM))} m`;
}

export function withUnit(value: number | null | undefined, unit: string): string {
  const n = num(value);
  return n === '—' || !unit ? n : `${n} ${unit}`;
}

/** 2026-03-01 14:05:09 in the viewer's time zone. */
export function dateTime(iso: string | null | undefined): string {
  if (!iso) return '—';
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  const p = (n: number) => String(n).padStart(2, '0');
  return `${d.getFullYear()}-${p(d.getMonth() + 1)}-${p(d.getDate())} ${p(d.getHours())}:${p(d.getMinutes())}:${p(d.getSeconds())}`;
}

export function clockTime(ms: number, withSeconds: boolean): string {
  const d = new Date(ms);
  const p = (n: number) => String(n).padStart(2, '0');
  return withSeconds ? `${p(d.getHours())}:${p(d.getMinutes())}:${p(d.getSeconds())}` : `${p(d.getHours())}:${p(d.getMinutes())}`;
}

/** "4 min ago", "2 h ago", "3 d ago". */
export function ago(iso: string | null | undefined, nowMs: number = Date.now()): string {
  if (!iso) return 'never';
  const s = Math.round(msToS(nowMs - new Date(iso).getTime()));
  if (s < 0) return 'just now';
  if (s < 60) return `${s} s ago`;
  if (s < 3600) return `${Math.floor(s / 60)} min ago`;
  if (s < 86_400) return `${Math.floor(s / 3600)} h ago`;
  return `${Math.floor(s / 86_400)} d ago`;
}

export function duration(ms: number): string {
  const s = Math.round(msToS(ms));
  if (s < 60) return `${s} s`;
  if (s < 3600) return `${Math.floor(s / 60)} min ${s % 60} s`;
  const h = Math.floor(s / 3600);
  return `${h} h ${Math.floor((s % 3600) / 60)} min`;
}

/** Units as people write them (the validator writes micro as "us", plain ASCII). */
export function unitText(unit: string): string {
  return unit === 'us' ? 'µs' : unit;
}
