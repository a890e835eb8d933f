import { z } from 'zod';
import { deviceEventSchema, type DeviceEvent } from './messages.js';

/**
 * A hand-written check of the telemetry event, the bulk of what devices send, that accepts only what
 * `deviceEventSchema` accepts and costs a fraction of it. It is a shortcut, not a second schema:
 * anything it does not accept goes to the zod schema, which decides and explains. A test holds it to
 * the schema on generated events.
 */

// The same pattern zod uses for z.string().datetime({ offset: true }) in messages.ts.
const ISO_TIME = z.regexes.datetime({ offset: true, local: false, precision: null });
const TELEMETRY_KEYS = 12;

const isCount = (x: unknown) => Number.isSafeInteger(x) && (x as number) >= 0;
const isPositiveInt = (x: unknown) => Number.isSafeInteger(x) && (x as number) > 0;
// Finite and not negative (NaN fails the comparison).
const isMeasure = (x: unknown) => typeof x === 'number' && x >= 0 && x !== Infinity;
const isShortString = (x: unknown, min: number) => typeof x === 'string' && x.length >= min && x.length <= 64;

/** True only for a telemetry event the schema accepts: exactly its twelve keys, each of the right type and range. */
export function isValidTelemetryEvent(e: unknown): e is DeviceEvent {
  if (typeof e !== 'object' || e === null || Array.isArray(e)) return false;
  const o = e as Record<string, unknown>;
  if (Object.getPrototypeOf(o) !== Object.prototype || Object.keys(o).length !== TELEMETRY_KEYS) return false;
  return (
    o.type === 'telemetry' &&
    Object.hasOwn(o, 'type') &&
    isPositiveInt(o.seq) &&
    typeof o.ts === 'string' &&
    ISO_TIME.test(o.ts) &&
    isShortString(o.task, 1) &&
    isShortString(o.profileId, 0) &&
    isPositiveInt(o.profileRevision) &&
    isShortString(o.releaseId, 0) &&
    isCount(o.frames) &&
    isMeasure(o.windowS) &&
    isMeasure(o.inferenceMsMean) &&
    isMeasure(o.inferenceMjMean) &&
    isMeasure(o.frameEnergyMjMean) &&
    // Twelve keys, all of them own properties of the object: no unknown key can be among them.
    Object.hasOwn(o, 'seq') && Object.hasOwn(o, 'ts') && Object.hasOwn(o, 'task') && Object.hasOwn(o, 'profileId') &&
    Object.hasOwn(o, 'profileRevision') && Object.hasOwn(o, 'releaseId') && Object.hasOwn(o, 'frames') &&
    Object.hasOwn(o, 'windowS') && Object.hasOwn(o, 'inferenceMsMean') && Object.hasOwn(o, 'inferenceMjMean') &&
    Object.hasOwn(o, 'frameEnergyMjMean')
  );
}

/** True when every element is a valid device event: telemetry by the shortcut, any other type by the schema. */
export function areValidDeviceEvents(events: readonly unknown[]): events is DeviceEvent[] {
  for (const e of events) {
    if (isValidTelemetryEvent(e)) continue;
    if (!deviceEventSchema.safeParse(e).success) return false;
  }
  return true;
}
