import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { z } from 'zod';
import { describeCatalogIssue, toDocument } from '../../src/document-files/index.js';
import { describeIssues, parseWith, zodIssues } from '../../src/schema/index.js';

const demoDevice = join(import.meta.dirname, '..', '..', 'profiles', 'greenhouse-demo', 'device-classes', 'gh-scout-a.json');

describe('a required field that is absent', () => {
  it('reads "missing: sensor.pixelPitchUm (expected a number)" in a real device-class document, path kept', () => {
    const doc = JSON.parse(readFileSync(demoDevice, 'utf8')) as { sensor: Record<string, unknown> };
    delete doc.sensor.pixelPitchUm;
    const r = toDocument('device-classes/gh-scout-a.json', doc);
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.issues).toEqual([{ file: 'device-classes/gh-scout-a.json', path: 'sensor.pixelPitchUm', message: 'missing: sensor.pixelPitchUm (expected a number)' }]);
    expect(describeCatalogIssue(r.issues[0]!)).toBe('device-classes/gh-scout-a.json: missing: sensor.pixelPitchUm (expected a number)');
    expect(describeIssues(r.issues, 'x.json')).toBe('x.json: missing: sensor.pixelPitchUm (expected a number)');
  });

  it('names each expected type in words, inside arrays too', () => {
    const schema = z.object({ name: z.string(), on: z.boolean(), items: z.array(z.object({ gainDb: z.number() })) });
    const r = parseWith(schema, { items: [{}] });
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.issues).toEqual([
      { path: 'name', message: 'missing: name (expected a text)' },
      { path: 'on', message: 'missing: on (expected true or false)' },
      { path: 'items[0].gainDb', message: 'missing: items[0].gainDb (expected a number)' },
    ]);
  });

  it('a present value of the wrong type is not called missing', () => {
    const r = parseWith(z.object({ sensor: z.object({ pixelPitchUm: z.number() }) }), { sensor: { pixelPitchUm: '3' } });
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.issues[0]!.path).toBe('sensor.pixelPitchUm');
    expect(r.issues[0]!.message).not.toMatch(/^missing/);
    expect(r.issues[0]!.message).toMatch(/expected number, received string/);
    expect(describeIssues(r.issues)).toMatch(/^sensor\.pixelPitchUm: /);
  });

  it('an explicit null is not absent: it is a wrong value, reported as such', () => {
    const r = parseWith(z.object({ exposureUs: z.number() }), { exposureUs: null });
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.issues[0]!.message).not.toMatch(/^missing/);
  });

  it('without the input at hand, absence is read from the library message', () => {
    const schema = z.object({ exposureUs: z.number() });
    const e = schema.safeParse({});
    expect(e.success).toBe(false);
    if (!e.success) expect(zodIssues(e.error)).toEqual([{ path: 'exposureUs', message: 'missing: exposureUs (expected a number)' }]);
  });
});
