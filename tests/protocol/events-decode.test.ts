import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeMessage } from '../../src/protocol/decode.js';
import { decodeEventsMessage } from '../../src/protocol/decode-events.js';
import { isValidTelemetryEvent } from '../../src/protocol/event-fast-check.js';
import { eventTexts } from '../../src/protocol/event-texts.js';
import { deviceEventSchema } from '../../src/protocol/messages.js';

/** Demo data: a telemetry reading of a greenhouse scout. */
const telemetry = (seq: number) => ({
  seq, ts: '2025-03-01T08:00:00.000Z', type: 'telemetry', task: 'fruit-counting', profileId: 'fruit-counting-a', profileRevision: 1,
  releaseId: 'gh-scout-a-v1', frames: 10, windowS: 1, inferenceMsMean: 0.141, inferenceMjMean: 0.0345, frameEnergyMjMean: 0.096,
});

// Field values near every edge the schema draws: types, signs, integers, lengths, calendar dates, offsets.
const anyNumber = fc.oneof(fc.integer({ min: -3, max: 3 }), fc.double({ noNaN: false }), fc.constantFrom(0, 1, 0.5, 2 ** 53, 2 ** 53 - 1, -0, 1e308, Number.MAX_VALUE));
const anyString = (maxLength: number) => fc.oneof(fc.string({ maxLength }), fc.constantFrom('', 'x'.repeat(64), 'x'.repeat(65)));
const anyTime = fc.oneof(
  fc.date({ min: new Date('1900-01-01'), max: new Date('2200-01-01'), noInvalidDate: true }).map((d) => d.toISOString()),
  // Leap days (Gregorian rule: 2024 and 2000 are leap years, 2025 and 1900 are not; common practice) and offsets.
  fc.constantFrom('2024-02-29T10:00:00Z', '2025-02-29T10:00:00Z', '2000-02-29T00:00:00.5+01:00', '1900-02-29T00:00:00Z',
    '2025-04-31T00:00:00Z', '2025-12-31T23:59:59.999-23:59', '2025-01-01T24:00:00Z', '2025-01-01T10:00:00', '2025-01-01 10:00:00Z', 'yesterday'),
);
const anyValue = fc.oneof(anyNumber, anyString(70), anyTime, fc.boolean(), fc.constant(null), fc.constant([]), fc.constant({}));
const telemetryLike = fc.record(
  {
    seq: fc.oneof(anyNumber, anyValue), ts: fc.oneof(anyTime, anyValue), type: fc.constantFrom('telemetry', 'motion', 'Telemetry'),
    task: fc.oneof(anyString(70), anyValue), profileId: fc.oneof(anyString(70), anyValue), profileRevision: fc.oneof(anyNumber, anyValue),
    releaseId: fc.oneof(anyString(70), anyValue), frames: fc.oneof(anyNumber, anyValue), windowS: anyNumber,
    inferenceMsMean: anyNumber, inferenceMjMean: fc.oneof(anyNumber, anyValue), frameEnergyMjMean: anyNumber,
  },
  { requiredKeys: [] },
);
const withExtraKey = fc.tuple(telemetryLike, fc.constantFrom('extra', 'moving', '__proto__', 'constructor'), anyValue).map(([o, k, v]) => JSON.parse(JSON.stringify({ ...o, [k]: v })) as unknown);
const validTelemetry = fc.record({
  seq: fc.integer({ min: 1, max: 2 ** 40 }), ts: fc.date({ min: new Date('2000-01-01'), max: new Date('2100-01-01'), noInvalidDate: true }).map((d) => d.toISOString()),
  type: fc.constant('telemetry'), task: fc.string({ minLength: 1, maxLength: 64 }), profileId: fc.string({ maxLength: 64 }),
  profileRevision: fc.integer({ min: 1, max: 1000 }), releaseId: fc.string({ maxLength: 64 }), frames: fc.nat(),
  windowS: fc.double({ min: 0, max: 1e6, noNaN: true }), inferenceMsMean: fc.double({ min: 0, max: 1e6, noNaN: true }),
  inferenceMjMean: fc.double({ min: 0, max: 1e6, noNaN: true }), frameEnergyMjMean: fc.double({ min: 0, max: 1e6, noNaN: true }),
});

describe('telemetry shortcut against the event schema', () => {
  it('accepts only events the schema accepts (fast-check, 20,000 generated events)', () => {
    fc.assert(
      fc.property(fc.oneof(telemetryLike, withExtraKey, validTelemetry), (e) => {
        if (isValidTelemetryEvent(e)) expect(deviceEventSchema.safeParse(e).success).toBe(true);
      }),
      { numRuns: 20_000 },
    );
  });

  it('takes every valid telemetry event, so the shortcut is the path telemetry actually goes', () => {
    // As the server sees it: parsed from JSON text.
    fc.assert(fc.property(validTelemetry, (e) => isValidTelemetryEvent(JSON.parse(JSON.stringify(e)))), { numRuns: 5_000 });
  });

  it('refuses a leap day of a common year, an unknown key and a negative count', () => {
    expect(isValidTelemetryEvent({ ...telemetry(1), ts: '2025-02-29T10:00:00Z' })).toBe(false);
    expect(isValidTelemetryEvent({ ...telemetry(1), ts: '2024-02-29T10:00:00Z' })).toBe(true);
    expect(isValidTelemetryEvent({ ...telemetry(1), moving: true })).toBe(false);
    expect(isValidTelemetryEvent({ ...telemetry(1), frames: -1 })).toBe(false);
  });
});

describe('events message decoding for the server', () => {
  const asPayload = (events: unknown[]) => Buffer.from(JSON.stringify({ v: 1, events }));

  it('gives the same verdict, reason and detail as the schema on generated messages (fast-check)', () => {
    const event = fc.oneof(validTelemetry, telemetryLike, withExtraKey, fc.constant({ seq: 3, ts: '2025-03-01T08:00:00Z', type: 'motion', moving: true }));
    const message = fc.oneof(
      fc.array(event, { minLength: 0, maxLength: 6 }).map(asPayload),
      fc.constantFrom('{"v":1,"events":[', '{"v":2,"events":[]}', '{"v":1}', '{"v":1,"events":[],"x":1}', 'null', '[]').map((t) => Buffer.from(t)),
    );
    fc.assert(
      fc.property(message, (payload) => {
        const fast = decodeEventsMessage(payload);
        const schema = decodeMessage('events', payload);
        expect(fast.ok).toBe(schema.ok);
        if (!fast.ok && !schema.ok) expect({ reason: fast.reason, detail: fast.detail }).toEqual({ reason: schema.reason, detail: schema.detail });
        if (fast.ok && schema.ok) {
          expect(fast.value.events).toEqual(schema.value.events);
          // Each text cut from the payload is that event, whatever its strings hold.
          expect(fast.value.texts.map((t) => JSON.parse(t) as unknown)).toEqual(fast.value.events);
        }
      }),
      { numRuns: 5_000 },
    );
  });

  it('rejects a batch with one wrong telemetry event and names it: events.2.frames', () => {
    const r = decodeEventsMessage(asPayload([telemetry(1), telemetry(2), { ...telemetry(3), frames: -4 }]));
    expect(r).toMatchObject({ ok: false, reason: 'wrong-schema', detail: expect.stringMatching(/^events\.2\.frames: /) });
  });

  it('keeps each event\'s JSON text as sent, spaces, escapes and braces inside strings included', () => {
    const text = `{ "v" : 1 ,\n "events" : [ {"seq":1,"ts":"2025-03-01T08:00:00Z","type":"release-refused","releaseId":null,"reason":"bad \\"sig\\" {x}, [y] \\\\"} ,\n\t${JSON.stringify(telemetry(2))} ] }`;
    const r = decodeEventsMessage(Buffer.from(text));
    expect(r.ok).toBe(true);
    if (!r.ok) return;
    expect(r.value.texts[0]).toBe('{"seq":1,"ts":"2025-03-01T08:00:00Z","type":"release-refused","releaseId":null,"reason":"bad \\"sig\\" {x}, [y] \\\\"}');
    expect(r.value.texts[1]).toBe(JSON.stringify(telemetry(2)));
    r.value.texts.forEach((t, i) => expect(JSON.parse(t)).toEqual(r.value.events[i]));
  });

  it('serialises instead when the array cannot be found plainly (a key written with an escape)', () => {
    expect(eventTexts('{"v":1,"ev\\u0065nts":[{"seq":1}]}', 1)).toBeNull();
    const r = decodeEventsMessage(Buffer.from(`{"v":1,"ev\\u0065nts":[${JSON.stringify(telemetry(1))}]}`));
    expect(r.ok && r.value.texts).toEqual([JSON.stringify(telemetry(1))]);
  });
});
