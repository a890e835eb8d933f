import type { z } from 'zod';
import { MAX_PAYLOAD_BYTES } from './limits.js';
import { PROTOCOL_VERSION, ackMessageSchema, commandMessageSchema, eventsMessageSchema, stateMessageSchema } from './messages.js';
import { signedReleaseSchema } from './release.js';
import type { DeviceChannel } from './topics.js';

export type RejectReason = 'oversized' | 'malformed-json' | 'unknown-version' | 'wrong-schema';

export type Decoded<T> = { ok: true; value: T } | { ok: false; reason: RejectReason; detail: string };

const schemas = {
  release: signedReleaseSchema,
  cmd: commandMessageSchema,
  state: stateMessageSchema,
  events: eventsMessageSchema,
  ack: ackMessageSchema,
} satisfies Record<DeviceChannel, z.ZodType>;

export type ChannelMessage = { [K in DeviceChannel]: z.infer<(typeof schemas)[K]> };

/**
 * The common front of decoding: size limit first (before parsing), then JSON, then the protocol
 * version. Returns the parsed JSON, not yet checked against the channel's schema.
 */
export function readPayload(channel: DeviceChannel, payload: Uint8Array | string): Decoded<unknown> {
  const size = typeof payload === 'string' ? Buffer.byteLength(payload) : payload.byteLength;
  if (size > MAX_PAYLOAD_BYTES[channel]) {
    return { ok: false, reason: 'oversized', detail: `${size} bytes exceeds the ${MAX_PAYLOAD_BYTES[channel]}-byte limit of ${channel}` };
  }
  let json: unknown;
  try {
    json = JSON.parse(typeof payload === 'string' ? payload : Buffer.from(payload).toString('utf8'));
  } catch (e) {
    return { ok: false, reason: 'malformed-json', detail: (e as Error).message };
  }
  if (channel !== 'release') {
    const version = (json as { v?: unknown } | null)?.v;
    if (version !== PROTOCOL_VERSION) {
      return { ok: false, reason: 'unknown-version', detail: `protocol version ${JSON.stringify(version)}; this build speaks ${PROTOCOL_VERSION}` };
    }
  }
  return { ok: true, value: json };
}

/** A schema's verdict as a Decoded: the first issue names the field path. */
export function checkSchema<T>(schema: z.ZodType<T>, json: unknown): Decoded<T> {
  const r = schema.safeParse(json);
  if (!r.success) {
    const first = r.error.issues[0]!;
    return { ok: false, reason: 'wrong-schema', detail: `${first.path.join('.') || '(root)'}: ${first.message}` };
  }
  return { ok: true, value: r.data };
}

/**
 * Decodes one payload of a channel: size limit first (before parsing), then JSON, then the protocol
 * version, then the schema. Returns why a message was rejected instead of throwing.
 */
export function decodeMessage<C extends DeviceChannel>(channel: C, payload: Uint8Array | string): Decoded<ChannelMessage[C]> {
  const read = readPayload(channel, payload);
  if (!read.ok) return read;
  return checkSchema(schemas[channel] as unknown as z.ZodType<ChannelMessage[C]>, read.value);
}

export function encodeMessage(value: unknown): Buffer {
  return Buffer.from(JSON.stringify(value), 'utf8');
}
