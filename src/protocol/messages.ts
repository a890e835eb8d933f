import { z } from 'zod';
import { isoTimeSchema } from '../schema/common.js';

export const PROTOCOL_VERSION = 1;
const v = z.literal(PROTOCOL_VERSION);
const taskName = z.string().min(1).max(64);
const count = z.number().int().nonnegative();
const measure = z.number().nonnegative().refine(Number.isFinite, 'must be finite');

/** Device → server, retained. The device's own account of what it runs; the truth about what is applied. */
export const stateMessageSchema = z.strictObject({
  v,
  online: z.boolean(),
  agentVersion: z.string().max(64),
  ts: isoTimeSchema,
  releaseId: z.string().max(64).nullable(),
  releaseVersion: z.number().int().positive().nullable(),
  activeTask: taskName.nullable(),
  profileId: z.string().max(64).nullable(),
  profileRevision: z.number().int().positive().nullable(),
  moving: z.boolean(),
  /** A release received but not applied yet, and why. */
  pending: z.strictObject({ releaseId: z.string().max(64), version: z.number().int().positive(), reason: z.string().max(500) }).nullable(),
  /** The last release this device refused, and why. */
  refused: z.strictObject({ releaseId: z.string().max(64).nullable(), reason: z.string().max(2000) }).nullable(),
  lastSeq: count,
  /** sha256 (hex) of the applied release's signature: what tells two releases apart, whatever their ids say. */
  releaseDigest: z.string().regex(/^[0-9a-f]{64}$/).nullable().optional(),
  /** Why the agent keeps events or its run state in memory only (a full disk, say); null when all is on disk. */
  storageFault: z.string().max(500).nullable().optional(),
  /**
   * What the server's latest freshness statement for the device class says, as the agent judged it: stale when
   * a newer release exists than any it applied or holds, expired when the statement is past its expiry (no fresh
   * word since). Null until a statement was received; absent from older agents. Never a reason to apply anything.
   */
  freshness: z
    .strictObject({
      latestReleaseId: z.string().max(64).nullable(),
      latestVersion: z.number().int().positive().nullable(),
      latestDigest: z.string().regex(/^[0-9a-f]{64}$/).nullable(),
      issuedAt: isoTimeSchema,
      expiresAt: isoTimeSchema,
      stale: z.boolean(),
      expired: z.boolean(),
    })
    .nullable()
    .optional(),
  /**
   * On an offline state only: 'shutdown' when the agent published it itself before a clean disconnect,
   * 'connection-lost' in the last will the broker publishes when the connection drops. Absent from older agents.
   */
  offlineReason: z.enum(['shutdown', 'connection-lost']).optional(),
});
export type StateMessage = z.infer<typeof stateMessageSchema>;

const switchReason = z.enum(['local', 'command', 'release', 'startup', 'restore']);

export const eventBodySchema = z.discriminatedUnion('type', [
  z.strictObject({ type: z.literal('agent-started'), agentVersion: z.string().max(64) }),
  z.strictObject({
    type: z.literal('task-switched'),
    fromTask: taskName.nullable(),
    toTask: taskName,
    profileId: z.string().max(64),
    profileRevision: z.number().int().positive(),
    releaseId: z.string().max(64),
    reason: switchReason,
    /** Time inside the agent, excluding the driver's actuation. */
    overheadMs: measure,
    /** Time the driver spent moving focus and aperture and loading weights. */
    actuationMs: measure,
  }),
  z.strictObject({
    type: z.literal('switch-failed'),
    toTask: taskName,
    step: z.string().max(64),
    error: z.string().max(2000),
    restored: z.boolean(),
  }),
  z.strictObject({ type: z.literal('release-applied'), releaseId: z.string().max(64), version: z.number().int().positive() }),
  z.strictObject({ type: z.literal('release-deferred'), releaseId: z.string().max(64), version: z.number().int().positive(), reason: z.string().max(500) }),
  z.strictObject({ type: z.literal('release-refused'), releaseId: z.string().max(64).nullable(), reason: z.string().max(2000) }),
  z.strictObject({
    type: z.literal('telemetry'),
    task: taskName,
    profileId: z.string().max(64),
    profileRevision: z.number().int().positive(),
    releaseId: z.string().max(64),
    frames: count,
    windowS: measure,
    inferenceMsMean: measure,
    inferenceMjMean: measure,
    frameEnergyMjMean: measure,
  }),
  z.strictObject({ type: z.literal('motion'), moving: z.boolean() }),
  /** The freshness the agent reads from the server's statement changed (stale or expired set or cleared). */
  z.strictObject({
    type: z.literal('freshness'),
    stale: z.boolean(),
    expired: z.boolean(),
    latestReleaseId: z.string().max(64).nullable(),
    latestVersion: z.number().int().positive().nullable(),
    expiresAt: isoTimeSchema,
  }),
]);
export type EventBody = z.infer<typeof eventBodySchema>;
export type EventType = EventBody['type'];

const eventHead = { seq: z.number().int().positive(), ts: isoTimeSchema };
export type DeviceEvent = { seq: number; ts: string } & EventBody;

/**
 * A numbered event: each body type extended with seq and ts into one flat strict object. (An intersection
 * of the head and the body union checks the same fields but re-merges every event, about six times
 * slower on the server's ingest path, and lets unknown keys through.)
 */
export const deviceEventSchema = z.discriminatedUnion(
  'type',
  eventBodySchema.options.map((variant) => variant.extend(eventHead)) as unknown as [z.ZodObject, ...z.ZodObject[]],
) as unknown as z.ZodType<DeviceEvent>;

/**
 * The id of a device's event log, made at random with the log and kept with it: seqs count from 1 within
 * one epoch, so a wiped agent (a new log, a new epoch) is told apart from a replay of its old events.
 * Absent from agents that make none (the legacy epoch).
 */
export const eventLogEpochSchema = z.string().regex(/^[A-Za-z0-9_-]{8,64}$/, 'must be 8 to 64 letters, digits, "_" or "-"');

/** Device → server: a batch of numbered events of one epoch, oldest first. */
export const eventsMessageSchema = z.strictObject({ v, epoch: eventLogEpochSchema.optional(), events: z.array(deviceEventSchema).min(1).max(500) });
export type EventsMessage = z.infer<typeof eventsMessageSchema>;

/** Server → device: every event of the epoch (absent: the legacy epoch) up to and including `upTo` is stored. */
export const ackMessageSchema = z.strictObject({ v, upTo: count, epoch: eventLogEpochSchema.optional() });
export type AckMessage = z.infer<typeof ackMessageSchema>;

/** Server → device: operator commands. */
export const commandMessageSchema = z.strictObject({
  v,
  id: z.string().min(1).max(64),
  issuedBy: z.string().max(200),
  command: z.discriminatedUnion('type', [
    z.strictObject({ type: z.literal('set-task'), task: taskName }),
    z.strictObject({ type: z.literal('report-state') }),
  ]),
});
export type CommandMessage = z.infer<typeof commandMessageSchema>;
