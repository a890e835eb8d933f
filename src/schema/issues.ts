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

export function zodIssues(error: z.ZodError): InputIssue[] {
  return error.issues.map((i) => ({ path: formatPath(i.path), message: i.message }));
}

/** Parse with a schema and return data, never throw. */
export function parseWith<S extends z.ZodType>(schema: S, input: unknown): ParseResult<z.infer<S>> {
  const r = schema.safeParse(input);
  return r.success ? { ok: true, value: r.data } : { ok: false, issues: zodIssues(r.error) };
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
        : `${source ? `${source}: ` : ''}${i.path}: ${i.message}`,
    )
    .join('\n');
}
