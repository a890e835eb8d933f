import { checkSchema, readPayload, type Decoded } from './decode.js';
import { areValidDeviceEvents } from './event-fast-check.js';
import { eventTexts } from './event-texts.js';
import { MAX_EVENTS_PER_BATCH, MAX_PAYLOAD_BYTES } from './limits.js';
import { eventsMessageSchema, type DeviceEvent } from './messages.js';

/** A decoded events message: the events, and each one's JSON text as the device sent it. */
export interface DecodedEvents {
  events: DeviceEvent[];
  texts: string[];
}

/** The message's own shape (exactly `v` and a non-empty array of at most one batch of `events`), checked by hand. */
function hasPlainShape(json: unknown): json is { v: number; events: unknown[] } {
  if (typeof json !== 'object' || json === null || Object.keys(json).length !== 2) return false;
  const events = (json as { events?: unknown }).events;
  return Object.hasOwn(json, 'v') && Array.isArray(events) && events.length >= 1 && events.length <= MAX_EVENTS_PER_BATCH;
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
  if (hasPlainShape(read.value) && areValidDeviceEvents(read.value.events)) {
    events = read.value.events;
  } else {
    const checked = checkSchema(eventsMessageSchema, read.value);
    if (!checked.ok) return checked;
    events = checked.value.events;
  }
  const texts = eventTexts(text, events.length) ?? events.map((e) => JSON.stringify(e));
  return { ok: true, value: { events, texts } };
}
