/** Pure helpers of the console, checked without a browser. */
import { describe, expect, it } from 'vitest';
import { OKABE_ITO, linearScale, logScale } from '../../src/web/client/charts/scale.js';
import { MIN_SPAN_MS, timeTicks, zoomWindow } from '../../src/web/client/charts/time-axis.js';
import { num, unitText } from '../../src/web/client/format.js';
import { parseSseChunk } from '../../src/web/client/live.js';
import { parseWaveList } from '../../src/fleet/rollout/wave-text.js';
import { waveSizeSchema } from '../../src/fleet/rollout/spec.js';

describe('server-sent event parsing (WHATWG HTML Living Standard, §9.2 "Server-sent events", event stream interpretation)', () => {
  it('splits blocks at blank lines, joins multi-line data with newlines, and keeps an unfinished block for later', () => {
    const { messages, rest } = parseSseChunk('event: hello\nid: 1\ndata: {"a":1}\n\nevent: change\ndata: line one\ndata: line two\n\nevent: change\ndata: {"par');
    expect(messages).toEqual([
      { event: 'hello', data: '{"a":1}' },
      { event: 'change', data: 'line one\nline two' },
    ]);
    expect(rest).toBe('event: change\ndata: {"par');
  });

  it('treats CRLF and CR line ends like LF, defaults the event name to "message", and skips blocks without data', () => {
    const { messages } = parseSseChunk('data: x\r\n\r\n: a comment\r\n\r\nevent: ping\rdata:y\r\r');
    expect(messages).toEqual([
      { event: 'message', data: 'x' },
      { event: 'ping', data: 'y' },
    ]);
  });
});

describe('wave sizes typed in the rollout form or after --waves', () => {
  it('reads robot counts and percentages, each of which the rollout API takes as it is', () => {
    expect(parseWaveList('1, 10%, 50%')).toEqual({ ok: true, waves: [1, '10%', '50%'] });
    expect(parseWaveList(' 2 ,12.5% ')).toEqual({ ok: true, waves: [2, '12.5%'] });
    for (const w of [1, '10%', '12.5%', '100%']) expect(waveSizeSchema.safeParse(w).success, String(w)).toBe(true);
  });

  it('refuses zero, negatives, fractions of a robot, more than 100 % and empty input, naming the part', () => {
    for (const bad of ['0', '-1', '1.5', '101%', '100.5%', '', ' , ', 'ten', '1,,2']) expect(parseWaveList(bad).ok, bad).toBe(false);
    expect(parseWaveList('1, 10%, lots')).toMatchObject({ ok: false, part: 'lots' });
  });
});

describe('timeline axis and zoom', () => {
  it('picks round steps: 15 min ticks for two hours, 3 h for a day, 1 min for five minutes (at most 8 ticks; common practice)', () => {
    const t0 = Date.UTC(2026, 2, 2, 8, 7, 0);
    expect(timeTicks(t0, t0 + 2 * 3_600_000).stepMs).toBe(15 * 60_000);
    expect(timeTicks(t0, t0 + 86_400_000).stepMs).toBe(3 * 3_600_000);
    const five = timeTicks(t0, t0 + 5 * 60_000);
    expect(five.stepMs).toBe(60_000);
    expect(five.ticks.length).toBeLessThanOrEqual(8);
    for (const t of five.ticks) expect(t % 60_000).toBe(0);
  });

  it('zooms around the centre and stops at two minutes', () => {
    const [a, b] = zoomWindow(0, 3_600_000, 0.5);
    expect([a, b]).toEqual([900_000, 2_700_000]);
    const [c, d] = zoomWindow(0, 3 * 60_000, 0.1);
    expect(d - c).toBe(MIN_SPAN_MS);
  });
});

describe('chart scales', () => {
  it('a log scale puts each decade the same distance apart (blur changes with 1/d, so distance is plotted on log axes; common practice)', () => {
    const x = logScale([0.1, 10], [0, 200]);
    expect(x(0.1)).toBeCloseTo(0);
    expect(x(1)).toBeCloseTo(100);
    expect(x(10)).toBeCloseTo(200);
    expect(x.invert(100)).toBeCloseTo(1);
    expect(x.ticks()).toEqual([0.1, 0.2, 0.5, 1, 2, 5, 10]);
  });

  it('a linear scale gives round ticks covering the domain', () => {
    const y = linearScale([0, 7.5], [100, 0]);
    expect(y.ticks(5)).toEqual([0, 2, 4, 6]);
    expect(y(7.5)).toBe(0);
  });

  it('uses the Okabe–Ito colours as published (Okabe & Ito 2008, "Color Universal Design", RGB 0–255)', () => {
    const rgb = (hex: string) => [1, 3, 5].map((i) => Number.parseInt(hex.slice(i, i + 2), 16));
    expect(rgb(OKABE_ITO.orange)).toEqual([230, 159, 0]);
    expect(rgb(OKABE_ITO.skyBlue)).toEqual([86, 180, 233]);
    expect(rgb(OKABE_ITO.bluishGreen)).toEqual([0, 158, 115]);
    expect(rgb(OKABE_ITO.yellow)).toEqual([240, 228, 66]);
    expect(rgb(OKABE_ITO.blue)).toEqual([0, 114, 178]);
    expect(rgb(OKABE_ITO.vermillion)).toEqual([213, 94, 0]);
    expect(rgb(OKABE_ITO.reddishPurple)).toEqual([204, 121, 167]);
  });
});

describe('numbers on screen', () => {
  it('shows about three significant figures, no exponent notation, a dash for a missing figure', () => {
    expect(num(132.0412)).toBe('132');
    expect(num(0.14134)).toBe('0.141');
    expect(num(7.5)).toBe('7.5');
    expect(num(120000)).toBe('120,000');
    expect(num(0.000961)).toBe('0.000961');
    expect(num(null)).toBe('—');
    expect(num(Number.POSITIVE_INFINITY)).toBe('∞');
    expect(unitText('us')).toBe('µs');
  });
});
