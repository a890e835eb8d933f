export interface RefusalLogOptions {
  /** Lines written per kind of refusal within a window; the rest are counted and summed up in one line. */
  linesPerWindow?: number;
  windowMs?: number;
  clock?: { now(): Date };
}

/** Writes one refusal; `fields` are written as JSON, so a topic or client id with a newline cannot forge a line. */
export type RefusalLog = (kind: string, fields: Record<string, unknown>) => void;

/**
 * The broker's refusal log: one JSON object per line, at most `linesPerWindow` lines per kind and window,
 * then a single line saying how many were left out when the next one of that kind comes after the window.
 * A client that repeats a refused publish in a loop fills neither the disk nor the operator's screen.
 */
export function createRefusalLog(log: (line: string) => void, options: RefusalLogOptions = {}): RefusalLog {
  const perWindow = options.linesPerWindow ?? 5;
  const windowMs = options.windowMs ?? 60_000;
  const clock = options.clock ?? { now: () => new Date() };
  const windows = new Map<string, { startMs: number; written: number; suppressed: number }>();
  return function logRefusal(kind, fields) {
    const nowMs = clock.now().getTime();
    let w = windows.get(kind);
    if (!w || nowMs - w.startMs >= windowMs) {
      if (w && w.suppressed > 0) log(`broker: ${JSON.stringify({ refused: kind, suppressed: w.suppressed, windowMs })}`);
      w = { startMs: nowMs, written: 0, suppressed: 0 };
      windows.set(kind, w);
    }
    if (w.written >= perWindow) {
      w.suppressed += 1;
      return;
    }
    w.written += 1;
    log(`broker: ${JSON.stringify({ refused: kind, ...fields })}`);
  };
}
