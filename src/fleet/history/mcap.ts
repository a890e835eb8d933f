import { McapWriter, TempBuffer } from '@mcap/core';
import type { ConnectionChange } from '../../store/device-connections.js';
import type { RangeEvent } from '../../store/event-ranges.js';
import type { HistoryInterval } from './intervals.js';

/** The channels of a device's history recording: JSON messages, each described by a JSON Schema (MCAP's well-known json / jsonschema encodings). */
export const MCAP_TOPICS = {
  interval: '/ocellus/history/interval',
  taskSwitched: '/ocellus/device/task_switched',
  telemetry: '/ocellus/device/telemetry',
  connection: '/ocellus/device/connection',
} as const;

export interface HistoryRecordingInput {
  deviceId: string;
  fromIso: string;
  toIso: string;
  exportedAtIso: string;
  intervals: readonly HistoryInterval[];
  /** task-switched and telemetry events of the window, as stored (device clock). */
  events: readonly RangeEvent[];
  connections: readonly ConnectionChange[];
  producer: string;
}

const nullable = (type: string) => ({ type: [type, 'null'] });

const SCHEMAS = {
  interval: {
    title: 'ocellus.HistoryInterval',
    type: 'object',
    description: "A stretch of a device's history: a task profile it ran, or time offline (task unknown). log_time = start.",
    properties: {
      kind: { enum: ['profile', 'offline'] },
      deviceId: { type: 'string' },
      task: nullable('string'),
      profileId: nullable('string'),
      profileRevision: nullable('integer'),
      releaseId: nullable('string'),
      lastKnownTask: nullable('string'),
      start: { type: 'string', format: 'date-time' },
      end: { ...nullable('string'), format: 'date-time' },
      reason: { type: 'string' },
      seq: nullable('integer'),
      reported: { enum: ['live', 'after-the-fact'] },
    },
    required: ['kind', 'deviceId', 'start', 'end', 'reason', 'reported'],
  },
  event: {
    title: 'ocellus.DeviceEvent',
    type: 'object',
    description: 'An event as the device recorded it (its own clock in ts; log_time = ts).',
    properties: { seq: { type: 'integer' }, ts: { type: 'string', format: 'date-time' }, type: { type: 'string' } },
    required: ['seq', 'ts', 'type'],
  },
  connection: {
    title: 'ocellus.ConnectionChange',
    type: 'object',
    description: "A change of the device's connection as the server saw it (server clock; log_time = at).",
    properties: {
      at: { type: 'string', format: 'date-time' },
      online: { type: 'boolean' },
      cause: { type: 'string' },
      releaseId: nullable('string'),
      task: nullable('string'),
    },
    required: ['at', 'online', 'cause'],
  },
} as const;

/** Milliseconds since the epoch to MCAP's nanosecond timestamps. */
function nsOf(iso: string): bigint {
  return BigInt(Date.parse(iso)) * 1_000_000n;
}

const text = new TextEncoder();

/**
 * A device's history as an MCAP file (the format ROS 2 records in by default), written with @mcap/core:
 * intervals, task switches, telemetry and connection changes on their own channels, time-ordered per
 * channel and indexed, so it can be opened beside the robot's own recordings. Metadata "ocellus.history"
 * names the device, the window and which clock each channel uses.
 */
export async function historyRecording(input: HistoryRecordingInput): Promise<Uint8Array> {
  const buffer = new TempBuffer();
  const writer = new McapWriter({ writable: buffer, useChunks: true, useStatistics: true, useSummaryOffsets: true });
  await writer.start({ profile: '', library: input.producer });
  const schema = async (name: keyof typeof SCHEMAS) =>
    writer.registerSchema({ name: SCHEMAS[name].title, encoding: 'jsonschema', data: text.encode(JSON.stringify(SCHEMAS[name])) });
  const intervalSchema = await schema('interval');
  const eventSchema = await schema('event');
  const connectionSchema = await schema('connection');
  const channel = (topic: string, schemaId: number, clock: string) =>
    writer.registerChannel({ topic, schemaId, messageEncoding: 'json', metadata: new Map([['clock', clock], ['device', input.deviceId]]) });
  const channels = {
    interval: await channel(MCAP_TOPICS.interval, intervalSchema, 'device (offline intervals: server)'),
    taskSwitched: await channel(MCAP_TOPICS.taskSwitched, eventSchema, 'device'),
    telemetry: await channel(MCAP_TOPICS.telemetry, eventSchema, 'device'),
    connection: await channel(MCAP_TOPICS.connection, connectionSchema, 'server'),
  };
  await writer.addMetadata({
    name: 'ocellus.history',
    metadata: new Map([
      ['deviceId', input.deviceId],
      ['from', input.fromIso],
      ['to', input.toIso],
      ['exportedAt', input.exportedAtIso],
    ]),
  });

  type Out = { channelId: number; timeNs: bigint; body: unknown };
  const out: Out[] = [
    ...input.intervals.map((i) => ({ channelId: channels.interval, timeNs: nsOf(i.start), body: i })),
    ...input.events
      .filter((e) => e.event.type === 'task-switched' || e.event.type === 'telemetry')
      .map((e) => ({
        channelId: e.event.type === 'telemetry' ? channels.telemetry : channels.taskSwitched,
        timeNs: nsOf(e.ts),
        body: { ...e.event, seq: e.seq, ts: e.ts },
      })),
    ...input.connections.map((c) => ({
      channelId: channels.connection,
      timeNs: nsOf(c.at),
      body: { at: c.at, online: c.online, cause: c.cause, releaseId: c.releaseId, task: c.task },
    })),
  ];
  out.sort((a, b) => (a.timeNs < b.timeNs ? -1 : a.timeNs > b.timeNs ? 1 : 0));
  const counters = new Map<number, number>();
  for (const m of out) {
    const sequence = (counters.get(m.channelId) ?? 0) + 1;
    counters.set(m.channelId, sequence);
    await writer.addMessage({ channelId: m.channelId, sequence, logTime: m.timeNs, publishTime: m.timeNs, data: text.encode(JSON.stringify(m.body)) });
  }
  await writer.end();
  return buffer.get();
}
