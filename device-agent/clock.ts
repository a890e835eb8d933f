/** Time as the agent sees it: wall time for timestamps, a monotonic clock for measuring durations. */
export interface AgentClock {
  /** Milliseconds since the Unix epoch. */
  now(): number;
  /** Milliseconds from an arbitrary origin; never goes backwards. */
  monotonicMs(): number;
}

export const systemClock: AgentClock = {
  now: () => Date.now(),
  monotonicMs: () => performance.now(),
};
