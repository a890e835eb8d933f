import type { HistoryInterval } from './intervals.js';
import type { UsageRow } from './usage.js';

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

/** The columns of a history export: one row per interval, the cause flattened. */
export const INTERVAL_COLUMNS = [
  { header: 'deviceId', value: (i: HistoryInterval) => i.deviceId },
  { header: 'task', value: (i: HistoryInterval) => i.task },
  { header: 'profileId', value: (i: HistoryInterval) => i.profileId },
  { header: 'profileRevision', value: (i: HistoryInterval) => i.profileRevision },
  { header: 'releaseId', value: (i: HistoryInterval) => i.releaseId },
  { header: 'start', value: (i: HistoryInterval) => i.start },
  { header: 'end', value: (i: HistoryInterval) => i.end },
  { header: 'reason', value: (i: HistoryInterval) => i.reason },
  { header: 'causeRolloutId', value: (i: HistoryInterval) => i.cause?.rolloutId },
  { header: 'causeActor', value: (i: HistoryInterval) => i.cause?.actor },
  { header: 'causeAssignment', value: (i: HistoryInterval) => i.cause?.assignment },
  /** 'profile', or 'offline' (task unknown; releaseId is the release it had, lastKnownTask the task it last reported). */
  { header: 'kind', value: (i: HistoryInterval) => i.kind },
  /** 'live', or 'after-the-fact': from events the device kept while offline and delivered later (device clock). */
  { header: 'reported', value: (i: HistoryInterval) => i.reported },
  { header: 'lastKnownTask', value: (i: HistoryInterval) => i.lastKnownTask },
];

/** The columns of a usage export: one row per day and task. */
export const USAGE_COLUMNS = [
  { header: 'day', value: (u: UsageRow) => u.day },
  { header: 'task', value: (u: UsageRow) => u.task },
  { header: 'seconds', value: (u: UsageRow) => u.seconds },
  { header: 'frames', value: (u: UsageRow) => u.frames },
  { header: 'energyJ', value: (u: UsageRow) => u.energyJ },
  { header: 'inferenceEnergyJ', value: (u: UsageRow) => u.inferenceEnergyJ },
  { header: 'windows', value: (u: UsageRow) => u.windows },
];
