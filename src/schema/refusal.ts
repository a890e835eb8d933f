import type { InputIssue } from './issues.js';

/**
 * Why a domain operation said no: a stable code (src/api/refusals.ts maps each code to an HTTP status, the
 * CLI prints it), a message for people, the located issues and any extra data for the answer.
 */
export interface Refusal<C extends string> {
  ok: false;
  code: C;
  message: string;
  issues: InputIssue[];
  detail?: Record<string, unknown>;
}

/** A domain operation's result: the value, or a coded refusal. */
export type Outcome<T, C extends string> = { ok: true; value: T } | Refusal<C>;

export function refuse<C extends string>(code: C, message: string, issues: InputIssue[] = [], detail?: Record<string, unknown>): Refusal<C> {
  return { ok: false, code, message, issues, ...(detail ? { detail } : {}) };
}
