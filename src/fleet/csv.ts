/** One CSV field (RFC 4180): quoted when it holds a comma, a quote or a line break; quotes doubled. */
export function csvField(value: unknown): string {
  if (value === null || value === undefined) return '';
  const text = String(value);
  return /[",\r\n]/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

/** A CSV document (RFC 4180: CRLF line ends, a header row) from rows and the columns to take from each. */
export function toCsv<T>(columns: ReadonlyArray<{ header: string; value: (row: T) => unknown }>, rows: readonly T[]): string {
  const lines = [columns.map((c) => csvField(c.header)).join(',')];
  for (const row of rows) lines.push(columns.map((c) => csvField(c.value(row))).join(','));
  return lines.join('\r\n') + '\r\n';
}
