import { checkSchema, readPayload, type Decoded } from './decode.js';
import { areValidDeviceEvents } from './event-fast-check.js';
import { eventTexts } from './event-texts.js';
import { MAX_EVENTS_PER_BATCH, MAX_PAYLOAD_BYTES } from './limits.js';
import { eventsMessageSchema, type DeviceEvent } from './messages.js';

/** A decoded events message: the events, each one's JSON text as the device sent it, and the log's epoch. */
export interface DecodedEvents {
  events: DeviceEvent[];
  texts: string[];
  /** Absent for agents that send none (the legacy epoch). */
  epoch?: string;
}

const EPOCH = /^[A-Za-z0-9_-]{8,64}$/;

/**
 * The message's own shape (exactly `v`, a non-empty array of at most one batch of `events`, and optionally
 * a well-formed `epoch`, the same pattern as eventLogEpochSchema), checked by hand; `v` itself is checked by
 * the schema or by readPayload.
 */
function hasPlainShape(json: unknown): json is { v: number; events: unknown[]; epoch?: string } {
  if (typeof json !== 'object' || json === null) return false;
  const keys = Object.keys(json).length;
  const epoch = (json as { epoch?: unknown }).epoch;
  const epochOk = Object.hasOwn(json, 'epoch') ? keys === 3 && typeof epoch === 'string' && EPOCH.test(epoch) : keys === 2;
  const events = (json as { events?: unknown }).events;
  return epochOk && Object.hasOwn(json, 'v') && Array.isArray(events) && events.length >= 1 && events.length <= MAX_EVENTS_PER_BATCH;
}

/**
 * Decodes an events message as `decodeMessage('events', …)` does, with the same verdicts and
 * reasons, but faster for the telemetry that makes up most of them: events the hand-written check
 * accepts skip the schema, and anything else is judged (and explained) by the schema. Each event's
 * JSON text is cut from the payload rather than serialised again.
 */
export function decodeEventsMessage(payload: Uint8Array): Decoded<DecodedEvents> {
  if (payload.byteLength > MAX_PAYLOAD_BYTES.events) return readPayload('events', payload) as Decoded<never>;
  const text = Buffer.from(payload.buffer, payload.byteOffset, payload.byteLength).toString('utf8');
  const read = readPayload('events', text);
  if (!read.ok) return read;
  let events: DeviceEvent[];
  let epoch: string | undefined;
  if (hasPlainShape(read.value) && areValidDeviceEvents(read.value.events)) {
    events = read.value.events;
    epoch = read.value.epoch;
  } else {
    const checked = checkSchema(eventsMessageSchema, read.value);
    if (!checked.ok) return checked;
    events = checked.value.events;
    epoch = checked.value.epoch;
  }
  const texts = eventTexts(text, events.length) ?? events.map((e) => JSON.stringify(e));
  return { ok: true, value: epoch === undefined ? { events, texts } : { events, texts, epoch } };
}
