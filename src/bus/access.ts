import { deviceTopic, isClassFreshnessTopic, isValidDeviceId, type DeviceChannel } from '../protocol/topics.js';

/** Channels a device writes to, and channels it reads; every one only under its own id. */
export const DEVICE_PUBLISH_CHANNELS: readonly DeviceChannel[] = ['state', 'events'];
export const DEVICE_SUBSCRIBE_CHANNELS: readonly DeviceChannel[] = ['release', 'cmd', 'ack'];

/** Who is connected: the server's own account, or a device whose id is its MQTT username. */
export type BusPrincipal = { kind: 'server' } | { kind: 'device'; deviceId: string };

/** A device may publish only its own state and events. No wildcards can reach here (MQTT forbids them in PUBLISH). */
export function mayPublish(principal: BusPrincipal, topic: string): boolean {
  if (principal.kind === 'server') return true;
  if (!isValidDeviceId(principal.deviceId)) return false;
  return DEVICE_PUBLISH_CHANNELS.some((c) => deviceTopic(principal.deviceId, c) === topic);
}

/**
 * A device may subscribe only to the exact topics of its own release, commands and acks, and to the exact
 * freshness topic of a device class (signed statements every device of a class reads; the broker does not
 * know a device's class, and a statement names no device); no wildcard filters.
 */
export function maySubscribe(principal: BusPrincipal, filter: string): boolean {
  if (principal.kind === 'server') return true;
  if (!isValidDeviceId(principal.deviceId)) return false;
  return DEVICE_SUBSCRIBE_CHANNELS.some((c) => deviceTopic(principal.deviceId, c) === filter) || isClassFreshnessTopic(filter);
}
