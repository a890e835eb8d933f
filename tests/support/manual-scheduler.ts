/**
 * A scheduler for tests (src/fleet/rollout/scheduler.ts): time stands still until the test advances it, and
 * the timers that fall due then run in order of their due time, each followed by the promise work it started.
 */
import type { Scheduler } from '../../src/fleet/rollout/scheduler.js';

interface Timer {
  id: number;
  dueMs: number;
  everyMs: number | null;
  fn: () => void;
}

export interface ManualScheduler extends Scheduler {
  /** Moves time on by `ms`, running every timer that falls due on the way (those they set too). */
  advance(ms: number): Promise<void>;
  /** How many timers are set. */
  pending(): number;
}

/** Lets the promise jobs queued so far, and those they queue, run: a macrotask turn comes after all of them. */
export const settle = () => new Promise<void>((resolve) => setImmediate(resolve));

export function createManualScheduler(startMs = 0): ManualScheduler {
  let nowMs = startMs;
  let nextId = 1;
  const timers = new Map<number, Timer>();

  function add(ms: number, fn: () => void, everyMs: number | null): () => void {
    const id = nextId++;
    timers.set(id, { id, dueMs: nowMs + Math.max(0, ms), everyMs, fn });
    return () => void timers.delete(id);
  }

  function nextDue(untilMs: number): Timer | null {
    let first: Timer | null = null;
    for (const t of timers.values()) if (t.dueMs <= untilMs && (!first || t.dueMs < first.dueMs || (t.dueMs === first.dueMs && t.id < first.id))) first = t;
    return first;
  }

  return {
    nowMs: () => nowMs,
    after: (ms, fn) => add(ms, fn, null),
    every: (ms, fn) => add(ms, fn, Math.max(1, ms)),
    pending: () => timers.size,
    advance: async function advance(ms) {
      const untilMs = nowMs + ms;
      // Bounded: a timer that keeps setting itself at the same instant cannot hold the test forever.
      for (let fired = 0; fired < 100_000; fired++) {
        await settle();
        const t = nextDue(untilMs);
        if (!t) break;
        nowMs = Math.max(nowMs, t.dueMs);
        if (t.everyMs === null) timers.delete(t.id);
        else t.dueMs += t.everyMs;
        t.fn();
      }
      nowMs = untilMs;
      await settle();
    },
  };
}
