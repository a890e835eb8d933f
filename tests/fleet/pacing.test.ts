import { afterEach, describe, expect, it } from 'vitest';
import { createPassPacer, type PassPacer, type PassRequest } from '../../src/fleet/rollout/pacing.js';
import { createManualScheduler, type ManualScheduler } from '../support/manual-scheduler.js';

// When the rollout engine runs its passes (common practice for event-driven schedulers: a notice is never
// dropped, work that arrives during a run is done after it, runs never overlap). Time moves only when a test
// advances its scheduler; the timer is set to an hour so that only start(), reports and explicit calls make
// passes unless a test says otherwise.
const HOUR_MS = 3_600_000;

interface Rig {
  pacer: PassPacer;
  time: ManualScheduler;
  requests: PassRequest[];
  /** Holds the next pass open until release() is called. */
  holdNext(): { started: Promise<void>; release(): void };
  overlapped: () => boolean;
}

let current: PassPacer | null = null;
afterEach(async () => {
  await current?.stop();
  current = null;
});

function rig(moving = true, opensWaveOnce = false, opts: { tickMs?: number; busyMs?: number; changed?: () => boolean } = {}): Rig {
  let opensWave = opensWaveOnce;
  const requests: PassRequest[] = [];
  let hold: { started: () => void; gate: Promise<void> } | null = null;
  let running = 0;
  let overlapped = false;
  const time = createManualScheduler();
  const pacer = createPassPacer({
    tickMs: opts.tickMs ?? HOUR_MS,
    scheduler: time,
    reportsWake: true,
    changed: opts.changed ?? (() => false),
    onError: (e) => {
      throw e;
    },
    runPass: async (request) => {
      running += 1;
      overlapped ||= running > 1;
      requests.push(request.kind === 'reported' ? { kind: 'reported', deviceIds: new Set(request.deviceIds) } : request);
      const h = hold;
      hold = null;
      if (h) {
        h.started();
        await h.gate;
      }
      running -= 1;
      const fullPassNow = opensWave && request.kind === 'reported';
      if (fullPassNow) opensWave = false;
      return { busyMs: opts.busyMs ?? 0, moving, fullPassNow };
    },
  });
  current = pacer;
  return {
    pacer,
    time,
    requests,
    overlapped: () => overlapped,
    holdNext() {
      let release!: () => void;
      let started!: () => void;
      const gate = new Promise<void>((r) => (release = r));
      const startedP = new Promise<void>((r) => (started = r));
      hold = { started, gate };
      return { started: startedP, release };
    },
  };
}

const reportedIds = (requests: PassRequest[]) => requests.flatMap((r) => (r.kind === 'reported' ? [...r.deviceIds] : []));

describe('rollout engine pacing', () => {
  it('starts with a timer pass, and judges devices that report meanwhile in a short pass after it', async () => {
    const r = rig();
    r.pacer.start();
    // The timer pass is due and not yet run: the report must survive it.
    r.pacer.reported(['gh-row-01', 'gh-row-02']);
    expect(r.requests).toHaveLength(0);
    await r.time.advance(0);
    expect(r.requests).toHaveLength(2);
    expect(r.requests[0]).toEqual({ kind: 'timer' });
    expect(reportedIds(r.requests).sort()).toEqual(['gh-row-01', 'gh-row-02']);
  });

  it('a report that arrives while a pass runs is judged by the next pass; passes never overlap', async () => {
    const r = rig();
    const held = r.holdNext();
    r.pacer.start();
    await r.time.advance(0);
    await held.started;
    r.pacer.reported(['gh-row-03']);
    r.pacer.reported(['gh-row-04', 'gh-row-03']);
    expect(r.requests).toHaveLength(1);
    held.release();
    await r.time.advance(0);
    expect(r.requests).toHaveLength(2);
    expect(r.requests[1]).toEqual({ kind: 'reported', deviceIds: new Set(['gh-row-03', 'gh-row-04']) });
    const explicit = r.pacer.runFull();
    await explicit;
    expect(r.requests.at(-1)).toEqual({ kind: 'explicit' });
    expect(r.overlapped()).toBe(false);
  });

  it('a short pass that opened the next wave is followed by a timer pass at once, not at the timer\'s next turn', async () => {
    const r = rig(true, true);
    r.pacer.start();
    await r.time.advance(0);
    expect(r.requests).toHaveLength(1);
    r.pacer.reported(['gh-row-06']);
    // No time passes: the timer's next turn is an hour away, so the second timer pass can only be the prompt one.
    await r.time.advance(0);
    expect(r.requests.map((q) => q.kind)).toEqual(['timer', 'reported', 'timer']);
  });

  it('a rollout that changed gets a timer pass after the usual rest, not the ten-fold rest of timer passes', async () => {
    // Every pass works 1 s: the next may come after 1 s of rest; an unchanged timer pass only after 10 s.
    // Changed once: the first tick that asks is told so, later ones are not.
    let changed = false;
    const changedOnce = () => {
      const was = changed;
      changed = false;
      return was;
    };
    const r = rig(true, false, { tickMs: 10, busyMs: 1000, changed: changedOnce });
    r.pacer.start();
    await r.time.advance(0);
    expect(r.requests).toHaveLength(1);
    // Unchanged, no timer pass comes after the usual rest of 1 s: timer passes over it rest ten-fold, to 10 s.
    await r.time.advance(1_500);
    expect(r.requests).toHaveLength(1);
    // Changed: the very next tick brings its timer pass, 8.5 s before the ten-fold rest would end.
    changed = true;
    await r.time.advance(10);
    expect(r.requests).toHaveLength(2);
    expect(r.requests.map((q) => q.kind)).toEqual(['timer', 'timer']);
  });

  it('ignores reports while no rollout is moving: the next timer pass looks at every device anyway', async () => {
    const r = rig(false);
    r.pacer.start();
    await r.time.advance(0);
    expect(r.requests).toHaveLength(1);
    r.pacer.reported(['gh-row-05']);
    // A short pass would be set with no delay: nothing is set, and advancing runs nothing.
    expect(r.time.pending()).toBe(1);
    await r.time.advance(1_000);
    await r.pacer.runFull();
    expect(r.requests.map((q) => q.kind)).toEqual(['timer', 'explicit']);
  });
});
