import { parseArgs } from 'node:util';
import type { ParseArgsConfig } from 'node:util';
import { describeIssues, InputError } from '../schema/index.js';
import { EXIT_BAD_INPUT } from './io.js';
import type { CliIo } from './io.js';

/** Bad usage: an unknown flag, a missing or malformed value. The message names the flag. */
export class UsageError extends Error {
  override name = 'UsageError';
}

type Options = NonNullable<ParseArgsConfig['options']>;

/** node:util parseArgs in strict mode, its errors turned into UsageError. */
export function parseFlags<O extends Options>(args: string[], options: O, allowPositionals = false) {
  try {
    return parseArgs({ args, options, allowPositionals, strict: true });
  } catch (e) {
    throw new UsageError(e instanceof Error ? e.message : String(e));
  }
}

export interface NumberRule {
  /** Refuse 0 and negatives (default true). */
  positive?: boolean;
  integer?: boolean;
}

/** A numeric flag: finite, and positive unless told otherwise; the error names the flag and the value. */
export function toNumber(flag: string, raw: string, rule: NumberRule = {}): number {
  const text = raw.trim();
  const v = text === '' ? NaN : Number(text);
  const positive = rule.positive ?? true;
  if (!Number.isFinite(v)) throw new UsageError(`--${flag} must be a finite number, got '${raw}'`);
  if (positive && !(v > 0)) throw new UsageError(`--${flag} must be greater than 0, got ${raw}`);
  if (rule.integer && !Number.isInteger(v)) throw new UsageError(`--${flag} must be a whole number, got ${raw}`);
  return v;
}

export function requiredNumber(values: Record<string, unknown>, flag: string, rule?: NumberRule): number {
  const raw = values[flag];
  if (raw === undefined) throw new UsageError(`missing --${flag}`);
  return toNumber(flag, String(raw), rule);
}

export function optionalNumber(values: Record<string, unknown>, flag: string, fallback: number, rule?: NumberRule): number {
  const raw = values[flag];
  return raw === undefined ? fallback : toNumber(flag, String(raw), rule);
}

/** Write JSON with a trailing newline. */
export function printJson(io: CliIo, value: unknown): void {
  io.stdout(JSON.stringify(value, null, 2) + '\n');
}

/**
 * Run a command body; usage and input errors are printed (with `usage` for the former) and give exit code 2.
 * Anything else is a fault and is thrown on.
 */
export async function guard(io: CliIo, usage: string, body: () => Promise<number>): Promise<number> {
  try {
    return await body();
  } catch (e) {
    if (e instanceof UsageError) {
      io.stderr(`error: ${e.message}\n\n${usage}`);
      return EXIT_BAD_INPUT;
    }
    if (e instanceof InputError) {
      io.stderr(`error: ${e.message}\n${describeIssues(e.issues, e.source)}\n`);
      return EXIT_BAD_INPUT;
    }
    throw e;
  }
}
