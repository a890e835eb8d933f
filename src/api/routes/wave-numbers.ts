/**
 * Waves as people count them: the store and the engine index waves from 0; everything the API answers
 * numbers them from 1 (the first wave is wave 1), so the API, the CLI, the console and the audit agree.
 * A rollout past its last wave (completed) stays at its last wave.
 */
export function withWaveNumbers<T extends { currentWave: number; waveCount: number }>(view: T): T {
  const out: Record<string, unknown> = { ...view, currentWave: Math.min(view.currentWave + 1, Math.max(1, view.waveCount)) };
  const v = view as unknown as { waves?: Array<{ wave: number }>; devices?: Array<{ wave: number }>; pauseReason?: unknown };
  if (Array.isArray(v.waves)) out.waves = v.waves.map((w) => ({ ...w, wave: w.wave + 1 }));
  if (Array.isArray(v.devices)) out.devices = v.devices.map((d) => ({ ...d, wave: d.wave + 1 }));
  const reason = v.pauseReason as { wave?: unknown } | null | undefined;
  if (reason && typeof reason === 'object' && typeof reason.wave === 'number') out.pauseReason = { ...reason, wave: reason.wave + 1 };
  return out as T;
}
