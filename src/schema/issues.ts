import type { z } from 'zod';

/** A problem with input, located by field path (dot notation, array indices as numbers). */
export interface InputIssue {
  path: string;
  message: string;
  /** 1-based line and column in the source text, set when the text itself could not be parsed. */
  line?: number;
  column?: number;
}

export type ParseResult<T> = { ok: true; value: T } | { ok: false; issues: InputIssue[] };

export function formatPath(path: ReadonlyArray<PropertyKey>): string {
  return path.map((p) => (typeof p === 'number' ? `[${p}]` : String(p))).join('.').replace(/\.\[/g, '[') || '(root)';
}

/** How a missing value's expected type is named to a person ("expected a number"). */
const EXPECTED_NAMES: Record<string, string> = {
  number: 'a number',
  int: 'a whole number',
  string: 'a text',
  boolean: 'true or false',
  array: 'a list',
  object: 'an object',
  bigint: 'a whole number',
  date: 'a date',
};

/** The value at a path inside parsed input, or undefined when any step of the path is absent. */
function valueAt(input: unknown, path: ReadonlyArray<PropertyKey>): unknown {
  let v: unknown = input;
  for (const key of path) {
    if (v === null || typeof v !== 'object') return undefined;
    v = (v as Record<PropertyKey, unknown>)[key];
  }
  return v;
}

/**
 * Located issues from a schema error. A required field that is absent reads "missing: a.b (expected a number)"
 * rather than the library's "expected number, received undefined". With the checked `input` at hand the absence
 * is read from the input itself; without it, from the library's wording.
 */
export function zodIssues(error: z.ZodError, input?: unknown): InputIssue[] {
  const inputGiven = arguments.length > 1;
  return error.issues.map((i) => {
    const path = formatPath(i.path);
    if (i.code === 'invalid_type') {
      const absent = inputGiven ? valueAt(input, i.path) === undefined : /received undefined$/.test(i.message);
      if (absent) {
        const expected = EXPECTED_NAMES[String(i.expected)] ?? String(i.expected);
        return { path, message: `missing: ${path} (expected ${expected})` };
      }
    }
    return { path, message: i.message };
  });
}

/** "path: message", without repeating a path the message already names ("missing: a.b (…)"). */
export function describeIssue(issue: InputIssue): string {
  return issue.message.startsWith(`missing: ${issue.path} `) ? issue.message : `${issue.path}: ${issue.message}`;
}

/** Parse with a schema and return data, never throw. */
export function parseWith<S extends z.ZodType>(schema: S, input: unknown): ParseResult<z.infer<S>> {
  const r = schema.safeParse(input);
  return r.success ? { ok: true, value: r.data } : { ok: false, issues: zodIssues(r.error, input) };
}

/** An error that carries located input issues; the CLI and the API render it. */
export class InputError extends Error {
  constructor(
    message: string,
    readonly issues: InputIssue[],
    readonly source?: string,
  ) {
    super(message);
    this.name = 'InputError';
  }
}

/** Human-readable lines: "file: path: message", or "file:line:column: message" for a text that would not parse. */
export function describeIssues(issues: InputIssue[], source?: string): string {
  return issues
    .map((i) =>
      i.line !== undefined
        ? `${source ?? '(input)'}:${i.line}:${i.column ?? 1}: ${i.message}`
        : `${source ? `${source}: ` : ''}${describeIssue(i)}`,
    )
    .join('\n');
}
