import { describe, expect, it } from 'vitest';
import { describeCatalogIssue, parseText } from '../../src/document-files/index.js';
import { positionOfOffset } from '../../src/document-files/text-position.js';
import { describeIssues } from '../../src/schema/index.js';

// Lines and columns count from 1, as in the GNU Coding Standards' "file:line:column: message" form
// (section 4.4, "Formatting Error Messages") — common practice for compilers and editors.
describe('line and column of a character offset', () => {
  it('counts from 1 and restarts the column after each line feed', () => {
    const text = 'ab\ncd\r\nef';
    expect(positionOfOffset(text, 0)).toEqual({ line: 1, column: 1 });
    expect(positionOfOffset(text, 2)).toEqual({ line: 1, column: 3 });
    expect(positionOfOffset(text, 3)).toEqual({ line: 2, column: 1 });
    expect(positionOfOffset(text, 8)).toEqual({ line: 3, column: 2 });
    expect(positionOfOffset(text, 99)).toEqual({ line: 3, column: 3 });
  });
});

describe('a JSON file that does not parse', () => {
  const text = ['{', '  "kind": "profile",', '  "id": "weeding-a",', '  "sensor": { "pixelPitchUm": },', '  "ok": true', '}'].join('\n');

  it('names the line and column of the stray "}" (line 4, column 31), not an offset', () => {
    const r = parseText('profiles/x.json', text);
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.issue).toMatchObject({ file: 'profiles/x.json', path: '(root)', line: 4, column: 31 });
    expect(r.issue.message).toMatch(/^not valid JSON: /);
    expect(describeCatalogIssue(r.issue)).toMatch(/^profiles\/x\.json:4:31: not valid JSON: Unexpected token/);
    expect(describeCatalogIssue(r.issue)).not.toMatch(/position/);
  });

  it('turns the "at position N" Node states into a line and column (a ":" expected before "x" on line 3, column 8)', () => {
    const r = parseText('a.json', '{\n  "kind": "task",\n  "id" "x"\n}');
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.issue).toMatchObject({ line: 3, column: 8 });
  });

  it('places a file cut short at its very end', () => {
    const r = parseText('a.json', '{\n  "kind": "task",\n');
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.issue).toMatchObject({ line: 3, column: 1 });
  });

  it('refuses a trailing comma and a comment, like JSON.parse does, and locates them', () => {
    const comma = parseText('a.json', '{\n  "id": "x",\n}');
    const comment = parseText('a.json', '{ "id": "x" }\n// note');
    expect(comma.ok || comment.ok).toBe(false);
    if (!comma.ok) expect(comma.issue).toMatchObject({ line: 3, column: 1 });
    if (!comment.ok) expect(comment.issue).toMatchObject({ line: 2, column: 1 });
  });
});

describe('a YAML file that does not parse', () => {
  it('carries the line and column the yaml package reports, without its excerpt', () => {
    const r = parseText('profiles/y.yaml', 'kind: profile\nid: weeding-a\nsensor: [1,\n c: d: e\n');
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.issue).toMatchObject({ line: 4, column: 5 });
    const line = describeCatalogIssue(r.issue);
    expect(line).toMatch(/^profiles\/y\.yaml:4:5: not valid YAML: /);
    expect(line).not.toContain('\n');
    expect(line).not.toMatch(/at line \d+, column \d+/);
  });

  it('a well-formed file parses and a field issue still reads "file: path: message"', () => {
    expect(parseText('ok.yaml', 'kind: task\nid: x\n')).toEqual({ ok: true, data: { kind: 'task', id: 'x' } });
    expect(describeCatalogIssue({ file: 'ok.yaml', path: 'nearDistanceM', message: 'must be greater than 0' })).toBe('ok.yaml: nearDistanceM: must be greater than 0');
    expect(describeIssues([{ path: '(root)', message: 'not valid YAML: x', line: 2, column: 3 }], 'ok.yaml')).toBe('ok.yaml:2:3: not valid YAML: x');
  });
});
