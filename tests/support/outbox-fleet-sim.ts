/**
 * A fleet of device outboxes (real event logs on disk) against a simulated broker and server, on
 * virtual time, so that delivery under loss, restarts and reconnects is checked without depending on
 * the machine's speed. The broker keeps each publisher's messages in order and holds at most
 * `queueMessages` for the server, dropping what comes on top (as Mosquitto does with QoS 1 messages
 * to a slow subscriber once its max_queued_messages queue, 1000 by default, is full: from memory);
 * the server stores `eventsPerMs` and acks each device
 * its highest contiguous seq after every message, as the bridge does.
 */
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { systemClock } from '../../device-agent/clock.js';
import { openEventLog, type EventLog } from '../../device-agent/event-log.js';
import { createOutbox, type Outbox, type OutboxOptions, type OutboxTimers } from '../../device-agent/outbox.js';

export interface FleetSimSettings {
  devices: number;
  eventsPerDevice: number;
  eventsPerMs: number;
  queueMessages: number;
  /** Milliseconds each way between a device and the broker. */
  latencyMs: number;
  /** The server is down (its queue dropped, nothing received) during these intervals. */
  serverDown: Array<{ fromMs: number; toMs: number }>;
  /** Devices whose connection drops during these intervals. */
  disconnects: Array<{ device: number; fromMs: number; toMs: number }>;
  outbox: Omit<OutboxOptions, 'log' | 'send' | 'timers'>;
  untilMs: number;
}

export interface FleetSimResult {
  delivered: number;
  expected: number;
  duplicates: number;
  dropped: number;
  drainedAtMs: number | null;
  timerDelaysMs: number[];
}

/** Virtual time: callbacks ordered by due time, then by scheduling order. */
function virtualTime() {
  let now = 0;
  let order = 0;
  const due: Array<{ at: number; order: number; fn: () => void; cancelled: boolean }> = [];
  return {
    now: () => now,
    at(delayMs: number, fn: () => void) {
      const item = { at: now + delayMs, order: order++, fn, cancelled: false };
      let i = due.length;
      while (i > 0 && (due[i - 1]!.at > item.at || (due[i - 1]!.at === item.at && due[i - 1]!.order > item.order))) i -= 1;
      due.splice(i, 0, item);
      return item;
    },
    /** Runs the next callback; false when none is left before `untilMs`. */
    step(untilMs: number): boolean {
      const item = due[0];
      if (!item || item.at > untilMs) return false;
      due.shift();
      now = item.at;
      if (!item.cancelled) item.fn();
      return true;
    },
  };
}

export function runFleetSim(root: string, s: FleetSimSettings): { result: FleetSimResult; logs: EventLog[] } {
  const time = virtualTime();
  const timerDelaysMs: number[] = [];
  const timers: OutboxTimers = {
    now: () => time.now(),
    start: (fire, delayMs) => (timerDelaysMs.push(delayMs), time.at(delayMs, fire)),
    cancel: (handle) => void ((handle as { cancelled: boolean }).cancelled = true),
  };
  const stored = Array.from({ length: s.devices }, () => ({ seqs: new Set<number>(), contiguous: 0 }));
  const connected = Array.from({ length: s.devices }, () => false);
  const queue: Array<{ device: number; seqs: number[] }> = [];
  let serverBusy = false;
  let duplicates = 0;
  let dropped = 0;
  let delivered = 0;
  const expected = s.devices * s.eventsPerDevice;
  let drainedAtMs: number | null = null;
  const serverUp = () => !s.serverDown.some((d) => time.now() >= d.fromMs && time.now() < d.toMs);

  const logs: EventLog[] = [];
  const outboxes: Outbox[] = [];
  for (let d = 0; d < s.devices; d++) {
    const dir = join(root, `dev-${d}`);
    mkdirSync(dir, { recursive: true });
    const log = openEventLog(dir, systemClock);
    for (let i = 0; i < s.eventsPerDevice; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
    logs.push(log);
    outboxes.push(createOutbox({
      ...s.outbox, log, timers,
      send: (payload) => {
        if (!connected[d]) return;
        const seqs = (JSON.parse(payload) as { events: Array<{ seq: number }> }).events.map((e) => e.seq);
        time.at(s.latencyMs, () => arriveAtBroker(d, seqs));
      },
    }));
  }

  function arriveAtBroker(device: number, seqs: number[]) {
    if (!serverUp() || queue.length >= s.queueMessages) {
      dropped += seqs.length;
      return;
    }
    queue.push({ device, seqs });
    serveNext();
  }

  function serveNext() {
    if (serverBusy || queue.length === 0) return;
    const message = queue.shift()!;
    serverBusy = true;
    time.at(message.seqs.length / s.eventsPerMs, () => {
      serverBusy = false;
      if (!serverUp()) {
        queue.length = 0;
        return;
      }
      const st = stored[message.device]!;
      for (const seq of message.seqs) {
        if (st.seqs.has(seq)) duplicates += 1;
        else (st.seqs.add(seq), (delivered += 1));
      }
      while (st.seqs.has(st.contiguous + 1)) st.contiguous += 1;
      const upTo = st.contiguous;
      if (delivered === expected && drainedAtMs === null) drainedAtMs = time.now();
      time.at(s.latencyMs, () => connected[message.device] && outboxes[message.device]!.onAck(upTo));
      serveNext();
    });
  }

  for (const down of s.serverDown) time.at(down.fromMs, () => (queue.length = 0));
  for (let d = 0; d < s.devices; d++) time.at(0, () => ((connected[d] = true), outboxes[d]!.onConnected()));
  for (const c of s.disconnects) {
    time.at(c.fromMs, () => ((connected[c.device] = false), outboxes[c.device]!.onDisconnected()));
    time.at(c.toMs, () => ((connected[c.device] = true), outboxes[c.device]!.onConnected()));
  }
  while (drainedAtMs === null && time.step(s.untilMs));
  // Let the last acks reach the devices.
  while (time.step((drainedAtMs ?? s.untilMs) + 10 * s.latencyMs));
  for (const o of outboxes) o.close();
  return { result: { delivered, expected, duplicates, dropped, drainedAtMs, timerDelaysMs }, logs };
}
