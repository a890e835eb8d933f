/**
 * Canonical JSON for signing: object keys sorted by UTF-16 code units, no whitespace, numbers and
 * strings as JSON.stringify writes them (the approach of RFC 8785, JSON Canonicalization Scheme,
 * without its number re-serialisation, which JSON.stringify already matches for finite doubles).
 */
export function canonicalJson(value: unknown): string {
  if (value === null || typeof value !== 'object') {
    if (typeof value === 'number' && !Number.isFinite(value)) throw new TypeError('canonical JSON cannot hold NaN or Infinity');
    if (value === undefined) throw new TypeError('canonical JSON cannot hold undefined');
    return JSON.stringify(value);
  }
  if (Array.isArray(value)) return `[${value.map((v) => (v === undefined ? 'null' : canonicalJson(v))).join(',')}]`;
  const entries = Object.keys(value)
    .filter((k) => (value as Record<string, unknown>)[k] !== undefined)
    .sort()
    .map((k) => `${JSON.stringify(k)}:${canonicalJson((value as Record<string, unknown>)[k])}`);
  return `{${entries.join(',')}}`;
}
