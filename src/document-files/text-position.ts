import { parse as parseJsonc, printParseErrorCode, type ParseError } from 'jsonc-parser';

/** A place in a text, both counted from 1 (the convention of editors and compilers). */
export interface TextPosition {
  line: number;
  column: number;
}

/** Line and column (1-based) of a character offset; a CRLF or LF ends a line, the column counts UTF-16 units. */
export function positionOfOffset(text: string, offset: number): TextPosition {
  const end = Math.max(0, Math.min(offset, text.length));
  let line = 1;
  let lineStart = 0;
  for (let i = 0; i < end; i++) {
    if (text.charCodeAt(i) === 10) {
      line++;
      lineStart = i + 1;
    }
  }
  return { line, column: end - lineStart + 1 };
}

/**
 * Where strict JSON text first goes wrong. Node's JSON.parse names "at position N" for some errors but not for
 * an unexpected token, so the place comes from jsonc-parser run in strict mode (no comments, no trailing commas).
 * Returns undefined when that parser finds nothing wrong.
 */
export function firstJsonError(text: string): { offset: number; reason: string } | undefined {
  const errors: ParseError[] = [];
  parseJsonc(text, errors, { disallowComments: true, allowTrailingComma: false, allowEmptyContent: false });
  const first = errors[0];
  return first ? { offset: first.offset, reason: printParseErrorCode(first.error) } : undefined;
}

/** Where JSON.parse failed on `text`, from the error it threw. */
export function jsonErrorPosition(text: string, e: unknown): TextPosition {
  const stated = /at position (\d+)/.exec(e instanceof Error ? e.message : '');
  if (stated) return positionOfOffset(text, Number(stated[1]));
  // "Unexpected end of JSON input" and "Unexpected token" name no place; a strict scanner finds it.
  return positionOfOffset(text, firstJsonError(text)?.offset ?? text.length);
}
