import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeMessage } from '../../src/protocol/decode.js';
import { decodeEventsMessage } from '../../src/protocol/decode-events.js';
import { ackMessageSchema, eventsMessageSchema } from '../../src/protocol/messages.js';

/** Demo data: one motion event of a greenhouse scout. */
const motion = (seq: number) => ({ seq, ts: '2025-03-01T08:00:00.000Z', type: 'motion', moving: true });
const EPOCH = '5f0c1d2e3a4b59687766554433221100';

describe('event-log epoch in the protocol', () => {
  it('events and acks carry an optional epoch; absent means the legacy epoch', () => {
    expect(eventsMessageSchema.safeParse({ v: 1, events: [motion(1)] }).success).toBe(true);
    expect(eventsMessageSchema.safeParse({ v: 1, epoch: EPOCH, events: [motion(1)] }).success).toBe(true);
    expect(ackMessageSchema.safeParse({ v: 1, upTo: 3 }).success).toBe(true);
    expect(ackMessageSchema.parse({ v: 1, upTo: 3, epoch: EPOCH })).toEqual({ v: 1, upTo: 3, epoch: EPOCH });
  });

  it('refuses an epoch that is empty, too short, too long or holds a topic separator, and names the field', () => {
    for (const epoch of ['', 'abc', 'x'.repeat(65), 'abcd/efgh', 'abcd efgh', 42]) {
      const r = decodeMessage('events', JSON.stringify({ v: 1, epoch, events: [motion(1)] }));
      expect(r).toMatchObject({ ok: false, reason: 'wrong-schema', detail: expect.stringMatching(/^epoch: /) });
      expect(decodeMessage('ack', JSON.stringify({ v: 1, upTo: 1, epoch }))).toMatchObject({ ok: false, detail: expect.stringMatching(/^epoch: /) });
    }
  });

  it('the server’s fast decoding gives the schema’s verdict and the same epoch (fast-check)', () => {
    const epoch = fc.oneof(fc.constant(undefined), fc.constant(EPOCH), fc.stringMatching(/^[A-Za-z0-9_-]{8,64}$/), fc.string({ maxLength: 70 }), fc.integer());
    fc.assert(
      fc.property(epoch, fc.integer({ min: 1, max: 4 }), fc.boolean(), (e, n, extra) => {
        const message: Record<string, unknown> = { v: 1, ...(e === undefined ? {} : { epoch: e }), events: Array.from({ length: n }, (_, i) => motion(i + 1)) };
        if (extra) message.x = 1;
        const payload = Buffer.from(JSON.stringify(message));
        const fast = decodeEventsMessage(payload);
        const schema = decodeMessage('events', payload);
        expect(fast.ok).toBe(schema.ok);
        if (!fast.ok && !schema.ok) expect(fast.detail).toBe(schema.detail);
        if (fast.ok && schema.ok) {
          expect(fast.value.epoch).toBe(schema.value.epoch);
          expect(fast.value.texts.map((t) => JSON.parse(t) as unknown)).toEqual(schema.value.events);
        }
      }),
      { numRuns: 2_000 },
    );
  });

  it('cuts the events’ texts from the agents’ own envelope with an epoch', () => {
    const text = `{"v":1,"epoch":"${EPOCH}","events":[${JSON.stringify(motion(1))},${JSON.stringify(motion(2))}]}`;
    const r = decodeEventsMessage(Buffer.from(text));
    expect(r).toMatchObject({ ok: true, value: { epoch: EPOCH, texts: [JSON.stringify(motion(1)), JSON.stringify(motion(2))] } });
  });
});
