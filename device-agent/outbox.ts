import { MAX_EVENTS_PER_BATCH, MAX_PAYLOAD_BYTES } from '../src/protocol/limits.js';
import { PROTOCOL_VERSION } from '../src/protocol/messages.js';
import type { EventLog } from './event-log.js';
import { createResendTimeout } from './resend-timeout.js';

/** The outbox's clock and one timer, handed in so a simulation can run them on virtual time. */
export interface OutboxTimers {
  /** Milliseconds from an arbitrary origin; never goes backwards. */
  now(): number;
  /** Calls `fire` once, `delayMs` from now; returns something `cancel` accepts. */
  start(fire: () => void, delayMs: number): unknown;
  cancel(handle: unknown): void;
}

/**
 * Timers of the event loop. The verdict runs one turn after the timer, behind the I/O already
 * waiting: when the loop was blocked past the timeout, an ack that arrived meanwhile counts first.
 */
export const loopTimers: OutboxTimers = {
  now: () => performance.now(),
  start: function startTimer(fire, delayMs) {
    const handle: { timeout: NodeJS.Timeout | null; immediate: NodeJS.Immediate | null } = { timeout: null, immediate: null };
    handle.timeout = setTimeout(() => {
      handle.timeout = null;
      handle.immediate = setImmediate(fire);
    }, delayMs);
    handle.timeout.unref?.();
    return handle;
  },
  cancel: function cancelTimer(handle) {
    const h = handle as { timeout: NodeJS.Timeout | null; immediate: NodeJS.Immediate | null };
    if (h.timeout) clearTimeout(h.timeout);
    if (h.immediate) clearImmediate(h.immediate);
  },
};

export interface OutboxOptions {
  log: EventLog;
  /** Publishes one events message (QoS 1). */
  send(payload: string): void;
  /** Shortest wait for an ack to advance before resending; the wait follows the measured round trip above it. */
  ackTimeoutMs: number;
  /** Longest wait, which the round trip and the doubling reach at most; 16 × ackTimeoutMs by default. */
  maxAckTimeoutMs?: number;
  /** Most unacknowledged events in flight at once, so a long backlog does not flood the broker. */
  windowEvents?: number;
  /** Events sent again at a time when a loss is suspected, and the window a connection starts with. */
  resendEvents?: number;
  timers?: OutboxTimers;
}

export interface Outbox {
  /** New events were logged: send them soon (coalesced per tick). */
  kick(): void;
  onAck(upTo: number): void;
  onConnected(): void;
  onDisconnected(): void;
  close(): void;
}

// Leave room for the envelope around the events.
const BATCH_BYTES = MAX_PAYLOAD_BYTES.events - 1024;

/**
 * Resend-until-acked delivery of the event log, adaptive so that a busy server is not buried in
 * duplicates. The server acks its highest contiguous seq; the path (device, broker, server) keeps a
 * device's messages in order, so what an ack leaves out was lost only if something sent after it
 * got through. Congestion control follows TCP's (RFC 5681 slow start and loss recovery, RFC 6582
 * partial acks, RFC 6298 timer), counted in events:
 * - a connection starts with a window of `resendEvents` and widens it by what each ack covers, up
 *   to `windowEvents`;
 * - the timeout is restarted whenever an ack advances and follows the measured round trip (never
 *   below `ackTimeoutMs`), so a server working through a deep queue is not sent its queue again;
 * - when no ack advances for the timeout, only the first `resendEvents` unacknowledged events are
 *   sent again, the window drops back to that, and the timeout doubles (up to `maxAckTimeoutMs`);
 *   any progress undoes the doubling;
 * - the resend ends where no earlier message ended, so an ack stopping exactly there can only be
 *   the resend's; messages keep their order on the way, so by then every message sent before it has
 *   arrived or never will, and each gap the acks then show below what was in flight is a lost
 *   message, resent at once, one at a time, without waiting for another timeout; other acks just
 *   restart the timer;
 * - after a reconnect sending starts over from the first unacknowledged event, with the small window.
 * Duplicates are harmless (the server stores each (device, seq) once), merely wasteful.
 */
export function createOutbox(options: OutboxOptions): Outbox {
  const { log } = options;
  const timers = options.timers ?? loopTimers;
  const maxWindow = Math.max(1, options.windowEvents ?? 2000);
  const resendEvents = Math.max(1, Math.min(options.resendEvents ?? MAX_EVENTS_PER_BATCH, maxWindow));
  // The envelope before the events: the log's epoch (none for a legacy log), then the events array.
  const epoch = log.epoch();
  const envelope = epoch === null ? `{"v":${PROTOCOL_VERSION},"events":[` : `{"v":${PROTOCOL_VERSION},"epoch":${JSON.stringify(epoch)},"events":[`;
  const timeout = createResendTimeout(options.ackTimeoutMs, options.maxAckTimeoutMs ?? options.ackTimeoutMs * 16);
  let connected = false;
  /** Highest seq sent since the connection (re)started or the last ack beyond it. */
  let sentUpTo = log.ackedUpTo();
  let windowEvents = resendEvents;
  /** While recovering from a timeout: the highest seq that was in flight when it fired; 0 otherwise. */
  let recoverUpTo = 0;
  /** The last seq of the resend made when the timer fired. */
  let probeUpTo = 0;
  /** The resend made when the timer fired arrived: messages sent before it have arrived or are lost. */
  let earlierSettled = false;
  /** The last seq of the latest resend, and the highest seq any resend carried since the connection began. */
  let resentUpTo = 0;
  let highestResent = 0;
  /** Last seqs of the messages sent, above the ack (where an ack may stop without anything lost), and when each was sent. */
  const messageEnds = new Map<number, number>();
  let timer: unknown = null;
  let scheduled: NodeJS.Immediate | null = null;

  /**
   * Sends up to `maxCount` events after `afterSeq` in messages of at most one batch; returns the last seq
   * sent (afterSeq when none). New events record where each message ended; a resend does not.
   */
  function sendAfter(afterSeq: number, maxCount: number, fresh: boolean): number {
    let upTo = afterSeq;
    let left = maxCount;
    while (left > 0) {
      const batch = log.after(upTo, Math.min(MAX_EVENTS_PER_BATCH, left), BATCH_BYTES);
      if (batch.length === 0) break;
      options.send(`${envelope}${batch.map((e) => e.json).join(',')}]}`);
      upTo = batch[batch.length - 1]!.seq;
      left -= batch.length;
      if (fresh) messageEnds.set(upTo, timers.now());
    }
    return upTo;
  }

  function stopTimer() {
    if (timer !== null) timers.cancel(timer);
    timer = null;
  }

  /** (Re)starts the progress timer while anything sent is unacknowledged. */
  function restartTimer() {
    stopTimer();
    if (connected && sentUpTo > log.ackedUpTo()) timer = timers.start(onTimeout, timeout.currentMs());
  }

  /** After a timeout: the first unacknowledged events, ending where no message ended. */
  function resendProbe() {
    const acked = log.ackedUpTo();
    let count = Math.min(resendEvents, sentUpTo - acked);
    if (count > 1 && messageEnds.has(acked + count) && acked + count < sentUpTo) count -= 1;
    probeUpTo = resentUpTo = sendAfter(acked, count, false);
    highestResent = Math.max(highestResent, resentUpTo);
    earlierSettled = false;
  }

  /** Once earlier messages have settled: the rest of the lost message that starts after the ack. */
  function resendLostMessage(acked: number) {
    let end = Infinity;
    for (const e of messageEnds.keys()) if (e > acked && e < end) end = e;
    const count = Math.min(resendEvents, (Number.isFinite(end) ? end : sentUpTo) - acked);
    resentUpTo = sendAfter(acked, count, false);
    highestResent = Math.max(highestResent, resentUpTo);
  }

  /**
   * Drops the messages an ack covers. The round trip of the latest one is a sample unless a resend
   * overlapped it (Karn's rule: the ack may be the resend's).
   */
  function settleAcknowledged(acked: number) {
    let latest = -1;
    let sentAtMs = 0;
    for (const [end, at] of messageEnds) {
      if (end > acked) continue;
      if (end > latest) (latest = end), (sentAtMs = at);
      messageEnds.delete(end);
    }
    if (latest > highestResent) timeout.sample(timers.now() - sentAtMs);
  }

  function onTimeout() {
    timer = null;
    if (!connected) return;
    if (sentUpTo <= log.ackedUpTo()) return pump();
    // Nothing advanced for a whole timeout: assume the oldest unacknowledged events were lost.
    recoverUpTo = Math.max(recoverUpTo, sentUpTo);
    windowEvents = resendEvents;
    timeout.backOff();
    resendProbe();
    restartTimer();
  }

  function pump() {
    if (scheduled) clearImmediate(scheduled);
    scheduled = null;
    if (!connected) return;
    const acked = log.ackedUpTo();
    sentUpTo = Math.max(sentUpTo, acked);
    const room = windowEvents - (sentUpTo - acked);
    if (room > 0) sentUpTo = sendAfter(sentUpTo, room, true);
    if (timer === null) restartTimer();
  }

  return {
    kick: function kick() {
      scheduled ??= setImmediate(pump);
    },
    onAck: function onAck(upTo) {
      const before = log.ackedUpTo();
      log.ack(upTo);
      const acked = log.ackedUpTo();
      if (acked <= before) return;
      windowEvents = Math.min(maxWindow, windowEvents + (acked - before));
      timeout.progressed();
      const endedHere = messageEnds.has(acked);
      settleAcknowledged(acked);
      if (recoverUpTo > 0 && acked >= recoverUpTo) recoverUpTo = 0;
      if (recoverUpTo > 0 && connected) {
        if (acked === probeUpTo && !endedHere) earlierSettled = true;
        // Only a resend can move the ack here now; stopping short of the in-flight end marks a lost message.
        if (earlierSettled && acked >= resentUpTo) resendLostMessage(acked);
      }
      restartTimer();
      pump();
    },
    onConnected: function onConnected() {
      connected = true;
      sentUpTo = log.ackedUpTo();
      highestResent = sentUpTo;
      messageEnds.clear();
      windowEvents = resendEvents;
      timeout.progressed();
      recoverUpTo = 0;
      stopTimer();
      pump();
    },
    onDisconnected: function onDisconnected() {
      connected = false;
      stopTimer();
    },
    close: function close() {
      connected = false;
      stopTimer();
      if (scheduled) clearImmediate(scheduled);
      scheduled = null;
    },
  };
}
