import { describe, expect, it } from 'vitest';
import { canonicalJson } from '../../src/protocol/canonical-json.js';

describe('canonical JSON for signing', () => {
  it('writes the example of RFC 8785 (JSON Canonicalization Scheme, §3.2.3) as the RFC does (example text from memory)', () => {
    const input = JSON.parse(
      '{"numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001], "string": "\\u20ac$\\u000F\\u000aA\'\\u0042\\u0022\\u005c\\\\\\"\\/", "literals": [null, true, false]}',
    ) as unknown;
    expect(canonicalJson(input)).toBe('{"literals":[null,true,false],"numbers":[333333333.3333333,1e+30,4.5,0.002,1e-27],"string":"€$\\u000f\\nA\'B\\"\\\\\\\\\\"/"}');
  });

  it('sorts keys by UTF-16 code units, leaves out undefined members, writes undefined array items as null', () => {
    expect(canonicalJson({ b: 1, a: { d: [1, undefined, 'x'], c: undefined }, A: true, é: 0, '\u{1F600}': 2, '\uFB33': 3 })).toBe(
      '{"A":true,"a":{"d":[1,null,"x"]},"b":1,"é":0,"\u{1F600}":2,"\uFB33":3}',
    );
  });

  it('refuses what JSON cannot hold exactly', () => {
    expect(() => canonicalJson({ x: Number.NaN })).toThrow(/NaN or Infinity/);
    expect(() => canonicalJson([Infinity])).toThrow(/NaN or Infinity/);
    expect(() => canonicalJson(undefined)).toThrow(/undefined/);
  });
});
