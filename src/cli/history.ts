import { rm, writeFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import { INTERVAL_COLUMNS, toCsv } from '../fleet/history/csv.js';
import type { HistoryInterval } from '../fleet/history/intervals.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_BAD_INPUT, EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { ApiError } from '../api-client/api-client.js';
import { CLIENT_FLAGS, createServerClient, reportServerError } from './server-client.js';

export const usage = `usage: ocellus history DEVICE [--from ISO-TIME] [--to ISO-TIME] [--csv | --json | --mcap FILE] [--server URL] [--token T]
  Which task profile a device ran when: one line per interval, from one task switch to the next, with the
  release and the change that brought it (a person's assignment or a rollout). While the server had no
  connection to the device the line says 'offline' (task unknown, with the task and release it last
  reported); what the device's own events, delivered after it came back, show it ran is marked
  'reported after the fact'. The window is [from, to); 'to' defaults to now and 'from' to one day before
  'to'. An interval still going has no end ('running' or 'still offline').
  --csv prints RFC 4180 CSV (the same columns as the API's export); --json the API's answer.
  --mcap FILE writes the window as an MCAP recording (intervals, task switches, telemetry and connection
  changes as JSON messages), to open beside the robot's own ROS 2 recordings; an existing FILE is kept.
`;

const OFFLINE_CAUSES: Record<string, string> = {
  'last-will': 'connection lost',
  'clean-disconnect': 'agent shut down',
  'keepalive-missed': 'keep-alive missed',
  'found-offline': 'found offline after a server restart',
};

function line(i: HistoryInterval): string {
  if (i.kind === 'offline') {
    const last = `last known task ${i.lastKnownTask ?? 'none'}, release ${i.releaseId ?? 'none'}`;
    return `${i.start}  ${i.end ?? 'still offline'.padEnd(24)}  offline  (task unknown; ${OFFLINE_CAUSES[i.reason] ?? i.reason}; ${last})\n`;
  }
  const cause = i.cause?.rolloutId ? `rollout ${i.cause.rolloutId}` : (i.cause?.assignment ?? 'unknown');
  const who = i.cause?.actor ? ` by ${i.cause.actor}` : '';
  const late = i.reported === 'after-the-fact' ? '  [reported after the fact, device clock]' : '';
  return `${i.start}  ${i.end ?? 'running'.padEnd(24)}  ${i.task}  ${i.profileId}@${i.profileRevision}  ${i.releaseId}  (${i.reason}; ${cause}${who})${late}\n`;
}

function withFormat(q: URLSearchParams, format: string): URLSearchParams {
  const out = new URLSearchParams(q);
  out.set('format', format);
  return out;
}

/** Fetches first, then writes with 'wx' (never over an existing file); a failed write leaves no partial file. */
async function writeRecording(io: CliIo, name: string, fetchBytes: () => Promise<Uint8Array>): Promise<number> {
  const file = resolve(io.cwd, name);
  const bytes = await fetchBytes();
  try {
    await writeFile(file, bytes, { flag: 'wx' });
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code !== 'EEXIST') await rm(file, { force: true });
    const why = code === 'EEXIST' ? 'already exists; choose another file or remove it first' : `cannot be written (${code ?? String(e)})`;
    io.stderr(`error: --mcap ${name}: ${why}\n`);
    return EXIT_BAD_INPUT;
  }
  io.stdout(`wrote ${bytes.byteLength} bytes of MCAP to ${name}\n`);
  return EXIT_OK;
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(args, { ...CLIENT_FLAGS, from: { type: 'string' }, to: { type: 'string' }, csv: { type: 'boolean' }, mcap: { type: 'string' } }, true);
    if (values.help) return io.stdout(usage), EXIT_OK;
    const [deviceId, ...extra] = positionals;
    if (!deviceId) throw new UsageError('give the device id: ocellus history DEVICE');
    if (extra.length > 0) throw new UsageError(`unexpected arguments: ${extra.join(' ')}`);
    if ([values.csv, values.json, values.mcap !== undefined].filter(Boolean).length > 1) throw new UsageError('give one of --csv, --json and --mcap');
    if (values.mcap === '') throw new UsageError('--mcap needs a file name, e.g. --mcap gh-a-01.mcap');
    for (const flag of ['from', 'to'] as const) {
      const v = values[flag];
      if (v !== undefined && Number.isNaN(Date.parse(v))) throw new UsageError(`--${flag} must be an ISO 8601 time such as 2025-03-01T00:00:00Z, got '${v}'`);
    }
    const client = createServerClient(values, io);
    const q = new URLSearchParams();
    if (values.from) q.set('from', new Date(values.from).toISOString());
    if (values.to) q.set('to', new Date(values.to).toISOString());
    try {
      if (values.mcap !== undefined) return await writeRecording(io, values.mcap, () => client.bytes(`/api/v1/devices/${encodeURIComponent(deviceId)}/history?${withFormat(q, 'mcap')}`));
      const r = await client.json<{ from: string; to: string; intervals: HistoryInterval[] }>('GET', `/api/v1/devices/${encodeURIComponent(deviceId)}/history${q.size ? `?${q}` : ''}`);
      if (values.json) printJson(io, r);
      else if (values.csv) io.stdout(toCsv(INTERVAL_COLUMNS, r.intervals));
      else {
        io.stdout(`device ${deviceId}, ${r.from} to ${r.to}\n`);
        for (const i of r.intervals) io.stdout(line(i));
        io.stdout(`${r.intervals.length} interval${r.intervals.length === 1 ? '' : 's'}\n`);
      }
      return EXIT_OK;
    } catch (e) {
      if (e instanceof ApiError) return reportServerError(io, e);
      throw e;
    }
  });
}
