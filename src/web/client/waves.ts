/** "1, 10%, 50%" → [1, "10%", "50%"]; null when a part is neither a whole number nor a percentage. */
export function parseWaves(text: string): Array<number | string> | null {
  const parts = text.split(',').map((p) => p.trim()).filter(Boolean);
  if (parts.length === 0) return null;
  const out: Array<number | string> = [];
  for (const p of parts) {
    if (/^\d+$/.test(p) && Number(p) > 0) out.push(Number(p));
    else if (/^\d+(\.\d+)?%$/.test(p) && Number.parseFloat(p) <= 100) out.push(p);
    else return null;
  }
  return out;
}
