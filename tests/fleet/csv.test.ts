import { describe, expect, it } from 'vitest';
import { csvField, INTERVAL_COLUMNS, toCsv } from '../../src/fleet/history/csv.js';
import type { HistoryInterval } from '../../src/fleet/history/intervals.js';

describe('history CSV cells', () => {
  it('quotes commas, quotes and line breaks as RFC 4180 §2.6–2.7 says', () => {
    expect(csvField('a,b')).toBe('"a,b"');
    expect(csvField('say "hi"')).toBe('"say ""hi"""');
    expect(csvField('two\r\nlines')).toBe('"two\r\nlines"');
    expect(csvField('plain')).toBe('plain');
    expect(csvField(null)).toBe('');
  });

  // OWASP, "CSV Injection": no cell may begin with = + - @ tab or carriage return; prepend a single quote,
  // wrap the cell in double quotes and double the quotes in it. NUL is added by OWASP ASVS 5.0 requirement 1.2.10.
  it.each([
    ['=HYPERLINK("http://x.test","open")', `"'=HYPERLINK(""http://x.test"",""open"")"`],
    ['+1+cmd', `"'+1+cmd"`],
    ['-2+3', `"'-2+3"`],
    ['@SUM(A1:A9)', `"'@SUM(A1:A9)"`],
    ['\t=1', `"'\t=1"`],
    ['\r=1', `"'\r=1"`],
    ['\0=1', `"'\0=1"`],
  ])('defuses a text cell that a spreadsheet would run as a formula: %j', (input, expected) => {
    expect(csvField(input)).toBe(expected);
  });

  it('leaves numbers alone, negative ones included, and quotes a semicolon that some locales split on', () => {
    expect(csvField(-3.5)).toBe('-3.5');
    expect(csvField(0)).toBe('0');
    expect(csvField('a;=1')).toBe('"a;=1"');
  });

  it('a device-reported task name in an exported interval reaches the file defused', () => {
    const interval = {
      deviceId: 'gh-a-01',
      task: '=cmd|\' /C calc\'!A0',
      profileId: 'p',
      profileRevision: 1,
      releaseId: 'r',
      start: '2026-01-01T00:00:00.000Z',
      end: null,
      reason: '@reported',
      cause: { rolloutId: null, actor: null, assignment: null },
    } as unknown as HistoryInterval;
    const lines = toCsv(INTERVAL_COLUMNS, [interval]).split('\r\n');
    const cells = lines[1]!;
    expect(cells).toContain(`"'=cmd|' /C calc'!A0"`);
    expect(cells).toContain(`"'@reported"`);
    expect(cells.split(',').some((c) => /^[=+\-@]/.test(c))).toBe(false);
  });
});
