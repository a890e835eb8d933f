import { afterEach, describe, expect, it } from 'vitest';
import { createPassPacer, type PassPacer, type PassRequest } from '../../src/fleet/rollout/pacing.js';
import { waitFor } from '../support/agent-fixtures.js';

// When the rollout engine runs its passes (common practice for event-driven schedulers: a notice is never
// dropped, work that arrives during a run is done after it, runs never overlap). The timer is set to an hour
// so that only start(), reports and explicit calls make passes here.
const HOUR_MS = 3_600_000;

interface Rig {
  pacer: PassPacer;
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

function rig(moving = true, opensWaveOnce = false, opts: { tickMs?: number; firstBusyMs?: number; changed?: () => boolean } = {}): Rig {
  let opensWave = opensWaveOnce;
  let firstBusyMs = opts.firstBusyMs ?? 0;
  const requests: PassRequest[] = [];
  let hold: { started: () => void; gate: Promise<void> } | null = null;
  let running = 0;
  let overlapped = false;
  const pacer = createPassPacer({
    tickMs: opts.tickMs ?? HOUR_MS,
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
      const busyMs = firstBusyMs;
      firstBusyMs = 0;
      return { busyMs, moving, fullPassNow };
    },
  });
  current = pacer;
  return {
    pacer,
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
    await waitFor(() => reportedIds(r.requests).length === 2, 'a short pass over both devices');
    expect(r.requests[0]).toEqual({ kind: 'timer' });
    expect(reportedIds(r.requests).sort()).toEqual(['gh-row-01', 'gh-row-02']);
  });

  it('a report that arrives while a pass runs is judged by the next pass; passes never overlap', async () => {
    const r = rig();
    const held = r.holdNext();
    r.pacer.start();
    await held.started;
    r.pacer.reported(['gh-row-03']);
    r.pacer.reported(['gh-row-04', 'gh-row-03']);
    expect(r.requests).toHaveLength(1);
    held.release();
    await waitFor(() => reportedIds(r.requests).length >= 2, 'the reports judged after the running pass');
    expect(r.requests[1]).toEqual({ kind: 'reported', deviceIds: new Set(['gh-row-03', 'gh-row-04']) });
    const explicit = r.pacer.runFull();
    await explicit;
    expect(r.requests.at(-1)).toEqual({ kind: 'explicit' });
    expect(r.overlapped()).toBe(false);
  });

  it('a short pass that opened the next wave is followed by a timer pass at once, not at the timer\'s next turn', async () => {
    const r = rig(true, true);
    r.pacer.start();
    await waitFor(() => r.requests.length === 1, 'the first timer pass');
    r.pacer.reported(['gh-row-06']);
    await waitFor(() => r.requests.length === 3, 'the short pass and the timer pass after it');
    expect(r.requests.map((q) => q.kind)).toEqual(['timer', 'reported', 'timer']);
  });

  it('a rollout that changed gets a timer pass after the usual rest, not the ten-fold rest of timer passes', async () => {
    // The first pass worked 1 s: the next may come after 1 s of rest; an unchanged timer pass only after 10 s.
    let changed = false;
    const r = rig(true, false, { tickMs: 10, firstBusyMs: 1000, changed: () => changed });
    r.pacer.start();
    await waitFor(() => r.requests.length === 1, 'the first timer pass');
    changed = true;
    await waitFor(() => r.requests.length >= 2, 'a timer pass for the changed rollout', 6_000);
    expect(r.requests.slice(0, 2).map((q) => q.kind)).toEqual(['timer', 'timer']);
  });

  it('ignores reports while no rollout is moving: the next timer pass looks at every device anyway', async () => {
    const r = rig(false);
    r.pacer.start();
    await waitFor(() => r.requests.length === 1, 'the first timer pass');
    r.pacer.reported(['gh-row-05']);
    await r.pacer.runFull();
    // A short pass would have been queued with no delay (these passes take no time): let such a timer fire first.
    await new Promise((resolve) => setTimeout(resolve, 10));
    expect(r.requests.map((q) => q.kind)).toEqual(['timer', 'explicit']);
  });
});
