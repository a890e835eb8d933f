import { MAX_EVENTS_PER_BATCH, MAX_PAYLOAD_BYTES } from '../src/protocol/limits.js';
import { PROTOCOL_VERSION } from '../src/protocol/messages.js';
import type { EventLog } from './event-log.js';

export interface OutboxOptions {
  log: EventLog;
  /** Publishes one events message (QoS 1). */
  send(payload: string): void;
  /** Resend everything unacknowledged when no ack has advanced for this long. */
  ackTimeoutMs: number;
  /** Most unacknowledged events in flight at once, so a long backlog does not flood the broker. */
  windowEvents?: number;
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
 * Resend-until-acked delivery of the event log. Batches go out in order within a window; an ack of
 * the server's highest contiguous seq drops what it covers. After a reconnect, or when no ack has
 * advanced for `ackTimeoutMs`, sending starts again right after the last ack, so an event the broker
 * dropped (or that arrived behind a gap) is sent again. Duplicates are harmless: the server stores
 * each (device, seq) once.
 */
export function createOutbox(options: OutboxOptions): Outbox {
  const { log } = options;
  const windowEvents = options.windowEvents ?? 2000;
  let connected = false;
  let sentUpTo = log.ackedUpTo();
  let timer: NodeJS.Timeout | null = null;
  let scheduled: NodeJS.Immediate | null = null;

  function armTimer() {
    if (timer) clearTimeout(timer);
    timer = null;
    if (!connected || log.unackedCount() === 0) return;
    timer = setTimeout(function resendAfterTimeout() {
      timer = null;
      sentUpTo = log.ackedUpTo();
      pump();
    }, options.ackTimeoutMs);
    timer.unref?.();
  }

  function pump() {
    scheduled = null;
    if (!connected) return;
    sentUpTo = Math.max(sentUpTo, log.ackedUpTo());
    let sent = false;
    while (sentUpTo - log.ackedUpTo() < windowEvents) {
      const room = windowEvents - (sentUpTo - log.ackedUpTo());
      const batch = log.after(sentUpTo, Math.min(MAX_EVENTS_PER_BATCH, room), BATCH_BYTES);
      if (batch.length === 0) break;
      options.send(`{"v":${PROTOCOL_VERSION},"events":[${batch.map((e) => e.json).join(',')}]}`);
      sentUpTo = batch[batch.length - 1]!.seq;
      sent = true;
    }
    if (sent && !timer) armTimer();
  }

  return {
    kick: function kick() {
      scheduled ??= setImmediate(pump);
    },
    onAck: function onAck(upTo) {
      const before = log.ackedUpTo();
      log.ack(upTo);
      if (log.ackedUpTo() > before) armTimer();
      pump();
    },
    onConnected: function onConnected() {
      connected = true;
      sentUpTo = log.ackedUpTo();
      pump();
    },
    onDisconnected: function onDisconnected() {
      connected = false;
      if (timer) clearTimeout(timer);
      timer = null;
    },
    close: function close() {
      connected = false;
      if (timer) clearTimeout(timer);
      if (scheduled) clearImmediate(scheduled);
    },
  };
}
