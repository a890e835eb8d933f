/** What to send for a Range request header (RFC 9110, section 14). */
export type RangeDecision =
  | { kind: 'full' }
  | { kind: 'partial'; start: number; end: number }
  | { kind: 'unsatisfiable' };

/**
 * Interprets a `Range` header against a representation of `sizeBytes`. One byte range is served as 206;
 * a header this server does not honour (another unit, several ranges, bad syntax) is ignored, which
 * RFC 9110 §14.2 allows, and the whole content is sent. A range starting at or past the end is 416.
 */
export function decideRange(header: string | undefined, sizeBytes: number): RangeDecision {
  if (!header) return { kind: 'full' };
  const m = /^bytes=\s*(\d*)\s*-\s*(\d*)\s*$/i.exec(header.trim());
  if (!m) return { kind: 'full' };
  const [, first, last] = m as unknown as [string, string, string];
  if (first === '' && last === '') return { kind: 'full' };
  if (first === '') {
    // Suffix range: the last N bytes (RFC 9110 §14.1.2).
    const suffix = Number(last);
    if (suffix === 0 || sizeBytes === 0) return { kind: 'unsatisfiable' };
    return { kind: 'partial', start: Math.max(0, sizeBytes - suffix), end: sizeBytes - 1 };
  }
  const start = Number(first);
  const end = last === '' ? sizeBytes - 1 : Math.min(Number(last), sizeBytes - 1);
  if (last !== '' && Number(last) < start) return { kind: 'full' };
  if (start >= sizeBytes) return { kind: 'unsatisfiable' };
  return { kind: 'partial', start, end };
}

/** True when an `If-None-Match` header matches the entity tag (weak comparison, RFC 9110 §13.1.2). */
export function etagMatches(ifNoneMatch: string | undefined, etag: string): boolean {
  if (!ifNoneMatch) return false;
  const strip = (t: string) => t.trim().replace(/^W\//, '');
  return ifNoneMatch.split(',').some((t) => t.trim() === '*' || strip(t) === strip(etag));
}
