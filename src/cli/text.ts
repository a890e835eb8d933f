/** A number for people: `sig` significant figures, plain notation, "infinity" for ∞. */
export function num(v: number, sig = 4): string {
  if (Number.isNaN(v)) return 'NaN';
  if (!Number.isFinite(v)) return v > 0 ? 'infinity' : '-infinity';
  if (v === 0) return '0';
  const digits = Math.max(0, sig - 1 - Math.floor(Math.log10(Math.abs(v))));
  return Number(v.toFixed(Math.min(digits, 12))).toString();
}

/** Two-column table of label and value. */
export function table(rows: [string, string][]): string {
  const width = Math.max(...rows.map(([l]) => l.length));
  return rows.map(([l, v]) => `${l.padEnd(width)}  ${v}`).join('\n') + '\n';
}
