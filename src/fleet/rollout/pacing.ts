import { systemScheduler, type Scheduler } from './scheduler.js';

/**
 * When the rollout engine runs its passes. A full pass looks at every open device of every moving rollout;
 * a short pass looks only at devices that just reported (their state or events were stored). Passes never
 * overlap, and each one rests afterwards as long as it worked, so the engine keeps to about half of the event
 * loop and leaves the rest to the broker and the bus bridge.
 *
 * Without reports a full pass runs on every tick. With reports, most verdicts (applied, refused, online) come
 * from short passes as soon as the facts are stored; timer passes are then needed only for the verdicts the
 * clock makes (apply timeouts, offline waits, telemetry timeouts, all counted in seconds), so the engine makes
 * them look only at devices the clock may have moved, and a timer pass rests FULL_PASS_REST times as long as
 * it took: over a 5,000-device wave it does not compete with the bus. A rollout that changed (created,
 * resumed, rolling back, next wave) still gets its timer pass on the next tick: `changed` is asked every tick.
 */
export const FULL_PASS_REST = 10;

/** Why a pass runs: the timer, an explicit call (look at everything now), or devices that reported. */
export type PassRequest = { kind: 'timer' } | { kind: 'explicit' } | { kind: 'reported'; deviceIds: ReadonlySet<string> };

export interface PassResult {
  /** The ms the pass worked (not the time it waited on the bus). */
  busyMs: number;
  /** Whether any rollout is moving (reports matter only then). */
  moving: boolean;
  /** The pass changed what a full pass would find (e.g. it opened a wave): run one as soon as the rest allows. */
  fullPassNow: boolean;
}

export type PassRunner = (request: PassRequest) => Promise<PassResult>;

export interface PassPacer {
  /** Starts the timer, with a full pass right away. */
  start(): void;
  /** Stops the timer and waits for the pass in progress. */
  stop(): Promise<void>;
  /** Devices whose state or events were just stored: a short pass over them runs soon. */
  reported(deviceIds: readonly string[]): void;
  /** Runs an explicit full pass now (after the one in progress). */
  runFull(): Promise<void>;
}

export interface PacerOptions {
  tickMs: number;
  /** The timers and the time the rests are counted in (the system's by default). */
  scheduler?: Scheduler;
  runPass: PassRunner;
  /** Devices' reports wake the engine (then timer passes over unchanged rollouts rest FULL_PASS_REST times longer). */
  reportsWake: boolean;
  /** Checked on every tick: some rollout needs a timer pass now whatever the rest (it started, resumed, opened a wave). */
  changed: () => boolean;
  onError: (e: unknown) => void;
}

export function createPassPacer(options: PacerOptions): PassPacer {
  const { tickMs, runPass } = options;
  const scheduler = options.scheduler ?? systemScheduler;
  let timer: (() => void) | null = null;
  let scheduled: (() => void) | null = null;
  let chain: Promise<void> = Promise.resolve();
  let busy = false;
  let started = false;
  let restUntil = 0;
  let nextFullAt = 0;
  let fullDue = false;
  let dirty = new Set<string>();
  // Until a pass says otherwise, reports may matter (a rollout may be moving).
  let moving = true;

  function safely(check: () => boolean): boolean {
    try {
      return check();
    } catch (e) {
      options.onError(e);
      return true;
    }
  }

  function kick() {
    if (!started || scheduled || busy) return;
    if (!fullDue && dirty.size === 0) return;
    scheduled = scheduler.after(Math.max(0, restUntil - scheduler.nowMs()), runNext);
  }

  function runNext() {
    scheduled = null;
    if (busy) return;
    // A timer pass does not look at every reported device (only at those the clock may have moved): the
    // reported ones wait for the short pass that follows it.
    if (fullDue) {
      fullDue = false;
      void enqueue({ kind: 'timer' });
    } else {
      const deviceIds = dirty;
      dirty = new Set();
      void enqueue({ kind: 'reported', deviceIds });
    }
  }

  function enqueue(request: PassRequest): Promise<void> {
    const full = request.kind !== 'reported';
    const run = async () => {
      busy = true;
      // A full pass may find a rollout that just started: collect the reports that arrive meanwhile.
      if (full) moving = true;
      const begun = scheduler.nowMs();
      let busyMs = 0;
      try {
        const result = await runPass(request);
        busyMs = result.busyMs;
        moving = result.moving;
        if (result.fullPassNow) fullDue = true;
      } catch (e) {
        busyMs = scheduler.nowMs() - begun;
        options.onError(e);
      } finally {
        busy = false;
        const end = scheduler.nowMs();
        restUntil = end + busyMs;
        if (full) nextFullAt = end + (options.reportsWake ? FULL_PASS_REST : 1) * busyMs;
        kick();
      }
    };
    chain = chain.then(run, run);
    return chain;
  }

  return {
    start: function start() {
      if (started) return;
      started = true;
      fullDue = true;
      kick();
      timer = scheduler.every(tickMs, () => {
        if (busy) return;
        if (!fullDue && scheduler.nowMs() < nextFullAt && !safely(options.changed)) return;
        fullDue = true;
        kick();
      });
    },
    stop: async function stop() {
      started = false;
      timer?.();
      scheduled?.();
      timer = null;
      scheduled = null;
      await chain.catch(() => undefined);
    },
    reported: function reported(deviceIds) {
      if (!moving) return;
      for (const id of deviceIds) dirty.add(id);
      kick();
    },
    runFull: function runFull() {
      return enqueue({ kind: 'explicit' });
    },
  };
}
