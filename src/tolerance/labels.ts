/**
 * A labels file: CSV with a header line `image,label`, one image name (relative to the image folder) and
 * one class index per line. Errors name the file, line and column.
 */
import { InputError } from '../schema/issues.js';

export function parseLabels(text: string, shown: string, images: readonly string[]): Map<string, number> {
  const lines = text.split(/\r?\n/);
  const fail = (line: number, column: number, message: string): never => {
    throw new InputError(`${shown}:${line}:${column}: ${message}`, [{ path: `line ${line}, column ${column}`, message }], shown);
  };
  const header = (lines[0] ?? '').split(',').map((s) => s.trim().toLowerCase());
  if (header[0] !== 'image' || header[1] !== 'label' || header.length !== 2) fail(1, 1, `the header must be "image,label", got "${lines[0] ?? ''}"`);
  const known = new Set(images);
  const labels = new Map<string, number>();
  lines.slice(1).forEach((raw, k) => {
    const line = k + 2;
    if (raw.trim() === '') return;
    const cells = raw.split(',');
    if (cells.length !== 2) fail(line, 1, `expected 2 cells (image,label), got ${cells.length}`);
    const name = cells[0]!.trim();
    const label = Number(cells[1]!.trim());
    if (!Number.isInteger(label) || label < 0) fail(line, cells[0]!.length + 2, `label must be a class index (0, 1, 2, …), got "${cells[1]!.trim()}"`);
    if (!known.has(name)) fail(line, 1, `image "${name}" is not in the image folder`);
    if (labels.has(name)) fail(line, 1, `image "${name}" is labelled twice`);
    labels.set(name, label);
  });
  const unlabelled = images.filter((n) => !labels.has(n));
  if (unlabelled.length > 0) fail(lines.length, 1, `${unlabelled.length} image(s) have no label, e.g. "${unlabelled[0]}"`);
  return labels;
}
