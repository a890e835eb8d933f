import { afterAll, describe, expect, it } from 'vitest';
import { systemClock } from '../../device-agent/clock.js';
import { openEventLog, type EventLog } from '../../device-agent/event-log.js';
import { createOutbox, type OutboxTimers } from '../../device-agent/outbox.js';
import { createResendTimeout } from '../../device-agent/resend-timeout.js';
import { tempDir } from '../support/agent-fixtures.js';
import { runFleetSim, type FleetSimSettings } from '../support/outbox-fleet-sim.js';

const dirs: Array<{ remove(): void }> = [];
afterAll(() => dirs.forEach((d) => d.remove()));

/** A timer the test fires by hand, on a clock the test moves. */
function handTimers() {
  let nowMs = 0;
  const live = new Set<{ fire: () => void; delayMs: number }>();
  const delaysMs: number[] = [];
  const timers: OutboxTimers = {
    now: () => nowMs,
    start: (fire, delayMs) => {
      const h = { fire, delayMs };
      live.add(h);
      delaysMs.push(delayMs);
      return h;
    },
    cancel: (h) => void live.delete(h as { fire: () => void; delayMs: number }),
  };
  return {
    timers,
    delaysMs,
    armed: () => live.size,
    /** Moves the clock to the live timer's deadline and fires it. */
    fire() {
      const [h] = live;
      if (!h) throw new Error('no timer is armed');
      live.delete(h);
      nowMs += h.delayMs;
      h.fire();
    },
    advance: (ms: number) => void (nowMs += ms),
  };
}

function backlog(label: string, events: number): EventLog {
  const dir = tempDir(label);
  dirs.push(dir);
  const log = openEventLog(dir.path, systemClock);
  for (let i = 0; i < events; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
  return log;
}

/** An outbox on a backlog, recording the seqs of every message it sends. */
function rig(label: string, events: number) {
  const log = backlog(label, events);
  const hand = handTimers();
  const messages: number[][] = [];
  const outbox = createOutbox({
    log, ackTimeoutMs: 2000, windowEvents: 2000, timers: hand.timers,
    send: (payload) => messages.push((JSON.parse(payload) as { events: Array<{ seq: number }> }).events.map((e) => e.seq)),
  });
  const sentSince = (from: number) => messages.slice(from).flat();
  return { log, hand, messages, outbox, sentSince };
}

const range = (from: number, to: number) => Array.from({ length: to - from + 1 }, (_v, i) => from + i);

describe('resend timeout (RFC 6298)', () => {
  it('first sample R = 1000 ms: SRTT = 1000, RTTVAR = 500, RTO = SRTT + 4·RTTVAR = 3000 ms (RFC 6298 §2.2)', () => {
    const t = createResendTimeout(200, 60_000);
    expect(t.currentMs()).toBe(200);
    t.sample(1000);
    expect(t.currentMs()).toBe(3000);
  });

  it('second sample R = 1400 ms: RTTVAR = 3/4·500 + 1/4·400 = 475, SRTT = 7/8·1000 + 1/8·1400 = 1050, RTO = 2950 ms (RFC 6298 §2.3)', () => {
    const t = createResendTimeout(200, 60_000);
    t.sample(1000);
    t.sample(1400);
    expect(t.currentMs()).toBeCloseTo(2950, 9);
  });

  it('doubles while nothing advances, up to the cap (RFC 6298 §5.5), and the configured timeout is the floor', () => {
    const t = createResendTimeout(2000, 32_000);
    t.sample(10);
    expect(t.currentMs()).toBe(2000);
    const seen = [];
    for (let i = 0; i < 6; i++) (t.backOff(), seen.push(t.currentMs()));
    expect(seen).toEqual([4000, 8000, 16_000, 32_000, 32_000, 32_000]);
    t.progressed();
    expect(t.currentMs()).toBe(2000);
  });
});

describe('outbox: adaptive resending', () => {
  it('starts a connection with one batch in flight and widens the window by what each ack covers, up to 2,000 events', () => {
    const r = rig('ob-window', 5000);
    r.outbox.onConnected();
    expect(r.sentSince(0)).toEqual(range(1, 500));
    r.outbox.onAck(500);
    expect(r.sentSince(1)).toEqual(range(501, 1500));
    r.outbox.onAck(1500);
    // Window min(2000, 1000 + 1000) with nothing in flight.
    expect(r.sentSince(3)).toEqual(range(1501, 3500));
    r.outbox.close();
    r.log.close();
  });

  it('after a timeout resends only the first unacknowledged events (at most one batch), not the window', () => {
    const r = rig('ob-timeout', 5000);
    r.outbox.onConnected();
    r.outbox.onAck(500);
    r.outbox.onAck(1500);
    const before = r.messages.length;
    r.hand.fire();
    const resent = r.sentSince(before);
    // 1501..2000 was one message: the resend stops one short of its end, so the resend's own ack can be told apart.
    expect(resent).toEqual(range(1501, 1999));
    expect(resent.length).toBeLessThanOrEqual(500);
    r.outbox.close();
    r.log.close();
  });

  it('doubles the wait while acks do not advance, and returns to it once one does', () => {
    const r = rig('ob-backoff', 3000);
    r.outbox.onConnected();
    for (let i = 0; i < 6; i++) r.hand.fire();
    // Each timeout resends one batch at most; the waits double from 2 s to the 16 × cap.
    expect(r.hand.delaysMs).toEqual([2000, 4000, 8000, 16_000, 32_000, 32_000, 32_000]);
    expect(r.sentSince(1).length).toBeLessThanOrEqual(6 * 500);
    r.outbox.onAck(100);
    expect(r.hand.delaysMs.at(-1)).toBe(2000);
    r.outbox.close();
    r.log.close();
  });

  it('recovers two lost messages after one timeout: the resend\'s ack shows each gap, which is resent at once', () => {
    const r = rig('ob-recover', 5000);
    r.outbox.onConnected();
    r.outbox.onAck(500);
    r.outbox.onAck(1500);
    // In flight: 1501-2000, 2001-2500, 2501-3000, 3001-3500. The first two are lost; the others arrive behind the gap.
    const before = r.messages.length;
    r.hand.fire();
    expect(r.sentSince(before)).toEqual(range(1501, 1999));
    const mark = r.messages.length;
    r.outbox.onAck(1999); // the resend arrived; 2000 (in the lost message) did not
    expect(r.sentSince(mark)).toEqual([2000]);
    const mark2 = r.messages.length;
    r.outbox.onAck(2000); // the rest of the first lost message arrived; the second lost one begins at 2001
    expect(r.sentSince(mark2).slice(0, 500)).toEqual(range(2001, 2500));
    const mark3 = r.messages.length;
    r.outbox.onAck(3500); // 2501-3500 were stored all along: recovered, with the one timeout, and new events flow
    expect(r.sentSince(mark3)).toEqual(range(3501, 5000));
    expect(r.log.unackedCount()).toBe(1500);
    r.outbox.close();
    r.log.close();
  });

  it('does not resend again when the acks after a timeout come from messages sent before it (a slow server, nothing lost)', () => {
    const r = rig('ob-slow', 5000);
    r.outbox.onConnected();
    r.outbox.onAck(500);
    r.outbox.onAck(1500);
    r.hand.fire();
    const mark = r.messages.length;
    r.outbox.onAck(2000);
    r.outbox.onAck(2500);
    const resentAfter = r.sentSince(mark).filter((seq) => seq <= 3500);
    expect(resentAfter).toEqual([]);
    r.outbox.close();
    r.log.close();
  });

  it('after a reconnect starts again from the first unacknowledged event with one batch, not a whole window', () => {
    const r = rig('ob-reconnect', 5000);
    r.outbox.onConnected();
    r.outbox.onAck(500);
    r.outbox.onAck(1500);
    r.outbox.onDisconnected();
    const mark = r.messages.length;
    r.outbox.onConnected();
    expect(r.sentSince(mark)).toEqual(range(1501, 2000));
    r.outbox.close();
    r.log.close();
  });
});

describe('outbox fleet on virtual time (100 devices draining 3,000-event backlogs)', () => {
  const base: FleetSimSettings = {
    devices: 100, eventsPerDevice: 3000, eventsPerMs: 30, queueMessages: 1000, latencyMs: 1,
    serverDown: [], disconnects: [], outbox: { ackTimeoutMs: 2000, windowEvents: 2000 }, untilMs: 600_000,
  };

  it('a server slower than the fleet\'s windows (6.7 s of queue) gets every event with under 10 % sent twice', () => {
    const root = tempDir('ob-fleet-slow');
    dirs.push(root);
    const { result, logs } = runFleetSim(root.path, base);
    logs.forEach((l) => l.close());
    expect(result.delivered).toBe(result.expected);
    expect(result.duplicates).toBeLessThan(0.1 * result.expected);
    // Resending whole windows on a fixed 2 s timer (the policy this replaces) sends more than everything again here.
    const fixedRoot = tempDir('ob-fleet-fixed');
    dirs.push(fixedRoot);
    const fixed = runFleetSim(fixedRoot.path, { ...base, outbox: { ackTimeoutMs: 2000, windowEvents: 2000, resendEvents: 2000, maxAckTimeoutMs: 2000 } });
    fixed.logs.forEach((l) => l.close());
    expect(fixed.result.duplicates).toBeGreaterThan(10 * result.duplicates);
  });

  it('delivers every event through broker drops, a server restart and reconnects, and sends nothing twice', () => {
    const root = tempDir('ob-fleet-faults');
    dirs.push(root);
    const { result, logs } = runFleetSim(root.path, {
      ...base, devices: 20, eventsPerDevice: 5000, eventsPerMs: 50, queueMessages: 20,
      serverDown: [{ fromMs: 500, toMs: 3500 }],
      disconnects: [0, 1, 2, 3, 4].map((device) => ({ device, fromMs: 1500 + device * 100, toMs: 2500 + device * 100 })),
    });
    logs.forEach((l) => l.close());
    expect(result.dropped).toBeGreaterThan(0);
    expect(result.delivered).toBe(result.expected);
    expect(result.duplicates).toBe(0);
    expect(logs.every((l) => l.unackedCount() === 0)).toBe(true);
  });
});
