const MINUTE = 60_000;
const STEPS_MS = [MINUTE, 2 * MINUTE, 5 * MINUTE, 10 * MINUTE, 15 * MINUTE, 30 * MINUTE, 3_600_000, 2 * 3_600_000, 3 * 3_600_000, 6 * 3_600_000, 12 * 3_600_000, 86_400_000];

/** Tick times for a window: the smallest round step that gives at most `maxTicks` ticks, aligned to local time. */
export function timeTicks(fromMs: number, toMs: number, maxTicks = 8): { ticks: number[]; stepMs: number } {
  const span = Math.max(1, toMs - fromMs);
  const stepMs = STEPS_MS.find((s) => span / s <= maxTicks) ?? STEPS_MS[STEPS_MS.length - 1]!;
  const offsetMs = new Date(fromMs).getTimezoneOffset() * MINUTE;
  const first = Math.ceil((fromMs - offsetMs) / stepMs) * stepMs + offsetMs;
  const ticks: number[] = [];
  for (let t = first; t <= toMs; t += stepMs) ticks.push(t);
  return { ticks, stepMs };
}

/** Shortest and longest windows the timeline zooms between: two minutes to two weeks. */
export const MIN_SPAN_MS = 2 * MINUTE;
export const MAX_SPAN_MS = 14 * 86_400_000;

/** A window scaled around a centre, kept within the zoom limits. */
export function zoomWindow(fromMs: number, toMs: number, factor: number, centreMs = (fromMs + toMs) / 2): [number, number] {
  const span = Math.min(MAX_SPAN_MS, Math.max(MIN_SPAN_MS, (toMs - fromMs) * factor));
  const ratio = (centreMs - fromMs) / Math.max(1, toMs - fromMs);
  const start = centreMs - span * ratio;
  return [Math.round(start), Math.round(start + span)];
}

/** The shortest window a device page opens on. */
export const MIN_FITTED_SPAN_MS = 10_000;

/**
 * The window a device page opens on: from a little before the device was enrolled to now, so a young
 * device's history fills the chart, but at least MIN_FITTED_SPAN_MS and at most a day.
 */
export function fittedWindow(sinceMs: number, nowMs: number): { fromMs: number; toMs: number } {
  const span = Math.min(86_400_000, Math.max(MIN_FITTED_SPAN_MS, (nowMs - sinceMs) * 1.05));
  return { fromMs: Math.round(nowMs - span), toMs: nowMs };
}
