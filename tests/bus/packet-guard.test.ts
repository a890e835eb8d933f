import { describe, expect, it } from 'vitest';
import { createPacketSizeMeter } from '../../src/bus/packet-guard.js';

// MQTT 3.1.1 §2.2.3: the remaining length is a variable-length integer, 7 bits a byte, low bits first,
// the top bit set while more bytes follow; at most four bytes (the spec's worked values: 127 → 0x7F,
// 128 → 0x80 0x01, 16 383 → 0xFF 0x7F, 268 435 455 → 0xFF 0xFF 0xFF 0x7F).
function packet(type: number, bodyBytes: number): Buffer {
  const length: number[] = [];
  let n = bodyBytes;
  do {
    let byte = n % 128;
    n = Math.floor(n / 128);
    if (n > 0) byte |= 0x80;
    length.push(byte);
  } while (n > 0);
  return Buffer.concat([Buffer.from([type, ...length]), Buffer.alloc(bodyBytes)]);
}

describe('MQTT packet size meter', () => {
  const limits = { maxConnectBytes: 200, maxPacketBytes: 20_000 };

  it('encodes the spec\'s worked remaining lengths as this test does', () => {
    expect([...packet(0x30, 127).subarray(1, 2)]).toEqual([0x7f]);
    expect([...packet(0x30, 128).subarray(1, 3)]).toEqual([0x80, 0x01]);
    expect([...packet(0x30, 16_383).subarray(1, 3)]).toEqual([0xff, 0x7f]);
  });

  it('passes packets within the limits, however the stream is cut into chunks', () => {
    const inspect = createPacketSizeMeter(limits);
    const stream = Buffer.concat([packet(0x10, 150), packet(0x30, 16_383), packet(0xc0, 0), packet(0x30, 19_000)]);
    for (let i = 0; i < stream.length; i += 7) expect(inspect(stream.subarray(i, i + 7))).toBeNull();
  });

  it('refuses a CONNECT over its own, smaller limit from its header alone', () => {
    const inspect = createPacketSizeMeter(limits);
    expect(inspect(packet(0x10, 300).subarray(0, 3))).toEqual({ phase: 'before-connect', claimedBytes: 303, limitBytes: 200 });
  });

  it('refuses a later packet over the limit, and a 200 MB claim as soon as its length bytes say so', () => {
    const inspect = createPacketSizeMeter(limits);
    expect(inspect(packet(0x10, 100))).toBeNull();
    expect(inspect(Buffer.from([0x30, 0x80, 0x80, 0x80, 0x64]))).toEqual({ phase: 'after-connect', claimedBytes: 5 + 200 * 1024 * 1024, limitBytes: 20_000 });
    // Length bytes so far already exceed the limit: refused before the last one arrives.
    const early = createPacketSizeMeter(limits);
    expect(early(packet(0x10, 10))).toBeNull();
    expect(early(Buffer.from([0x30, 0xff, 0xff, 0xff]))).toMatchObject({ phase: 'after-connect' });
  });

  it('refuses a remaining length with a fifth continuation byte (malformed)', () => {
    const inspect = createPacketSizeMeter({ maxConnectBytes: Number.MAX_SAFE_INTEGER, maxPacketBytes: Number.MAX_SAFE_INTEGER });
    expect(inspect(Buffer.from([0x10, 0x80, 0x80, 0x80, 0x80]))).toMatchObject({ claimedBytes: Infinity });
  });
});
