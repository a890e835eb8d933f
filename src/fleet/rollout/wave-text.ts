/**
 * The one rule for wave sizes written as text, as the CLI's `--waves 1,10%` and the console's wave field take
 * them: a whole number of devices, or a percentage of the rollout's devices from 0 to 100 ("12.5%").
 * No dependencies, so the console bundles it as it is; the request schema (spec.ts) uses the same pattern.
 */
export const WAVE_PERCENT_PATTERN = /^(100|[1-9]?[0-9](\.[0-9]+)?)%$/;

export type WaveSizeText = number | string;

export type WaveListResult = { ok: true; waves: WaveSizeText[] } | { ok: false; part: string; message: string };

/** "1, 10%, 50%" → [1, "10%", "50%"]; otherwise the first part that is neither, and why. */
export function parseWaveList(text: string): WaveListResult {
  const parts = text.split(',').map((p) => p.trim());
  if (parts.every((p) => p === '')) return { ok: false, part: text, message: 'give at least one wave size, e.g. 1,10%' };
  const waves: WaveSizeText[] = [];
  for (const p of parts) {
    if (/^\d+$/.test(p) && Number(p) > 0) waves.push(Number(p));
    else if (WAVE_PERCENT_PATTERN.test(p)) waves.push(p);
    else return { ok: false, part: p, message: `'${p}' is neither a whole number of devices above 0 nor a percentage from 0 to 100 like 10%` };
  }
  return { ok: true, waves };
}
