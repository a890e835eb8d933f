/**
 * The timers the rollout engine's passes run on. The server hands it the system's; tests hand it one they
 * advance themselves (tests/support/manual-scheduler.ts), so no test waits on a real tick.
 */
export interface Scheduler {
  /** A monotonic time in ms (only differences count). */
  nowMs(): number;
  /** Runs `fn` once after `ms`; the returned cancel stops it if it has not run yet. */
  after(ms: number, fn: () => void): () => void;
  /** Runs `fn` every `ms` until the returned cancel is called. */
  every(ms: number, fn: () => void): () => void;
}

/** The process's own timers; they do not keep the process alive. */
export const systemScheduler: Scheduler = {
  nowMs: () => performance.now(),
  after: function after(ms, fn) {
    const t = setTimeout(fn, ms);
    t.unref?.();
    return () => clearTimeout(t);
  },
  every: function every(ms, fn) {
    const t = setInterval(fn, ms);
    t.unref?.();
    return () => clearInterval(t);
  },
};
