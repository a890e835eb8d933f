/** MQTT topic layout, version 1. Every device lives in its own subtree; the server trusts the topic's id. */
export const TOPIC_ROOT = 'ocellus/v1/dev';

export type DeviceChannel = 'release' | 'cmd' | 'state' | 'events' | 'ack';
export const DEVICE_CHANNELS: readonly DeviceChannel[] = ['release', 'cmd', 'state', 'events', 'ack'];

/** Device ids: no MQTT wildcards, no level separator, no control characters, bounded length. */
export const DEVICE_ID_PATTERN = /^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$/;

export function isValidDeviceId(id: string): boolean {
  return DEVICE_ID_PATTERN.test(id);
}

export function deviceTopic(deviceId: string, channel: DeviceChannel): string {
  if (!isValidDeviceId(deviceId)) throw new RangeError(`invalid device id ${JSON.stringify(deviceId)}`);
  return `${TOPIC_ROOT}/${deviceId}/${channel}`;
}

/** Subscription filter for one channel of every device (server side). */
export function allDevicesFilter(channel: DeviceChannel): string {
  return `${TOPIC_ROOT}/+/${channel}`;
}

/**
 * The same filter as an MQTT 5 shared subscription of `group` (`$share/<group>/<filter>`, MQTT 5.0 §4.8.2): the
 * broker hands each matching message to one subscriber of the group. Group names carry no '/', '+' or '#'.
 */
export function sharedFilter(group: string, filter: string): string {
  if (!SHARE_GROUP_PATTERN.test(group)) throw new RangeError(`invalid shared-subscription group ${JSON.stringify(group)}: use letters, digits, '.', '_' or '-'`);
  return `$share/${group}/${filter}`;
}

export const SHARE_GROUP_PATTERN = /^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$/;

/** Where replicas of the server tell each other what changed (MQTT 5, subscribed with No Local); devices neither read nor write it. */
export const SERVER_CHANGES_TOPIC = 'ocellus/v1/servers/changes';

/** Splits a device topic; null when the topic is not one of ours or the id is invalid. */
export function parseDeviceTopic(topic: string): { deviceId: string; channel: DeviceChannel } | null {
  const parts = topic.split('/');
  if (parts.length !== 5 || `${parts[0]}/${parts[1]}/${parts[2]}` !== TOPIC_ROOT) return null;
  const [, , , deviceId, channel] = parts as [string, string, string, string, string];
  if (!isValidDeviceId(deviceId) || !(DEVICE_CHANNELS as readonly string[]).includes(channel)) return null;
  return { deviceId, channel: channel as DeviceChannel };
}

/** Topics of a device class (one per class, read by every device of it): the server's freshness statement. */
export const CLASS_TOPIC_ROOT = 'ocellus/v1/class';

/** Device-class ids as documents name them (src/schema/common.ts idSchema): MQTT-safe by construction. */
const DEVICE_CLASS_ID_PATTERN = /^[a-z0-9][a-z0-9._-]{0,63}$/;

/** Retained, QoS 1, published by the server only: the signed freshness statement of a device class. */
export function classFreshnessTopic(deviceClassId: string): string {
  if (!DEVICE_CLASS_ID_PATTERN.test(deviceClassId)) throw new RangeError(`invalid device class id ${JSON.stringify(deviceClassId)}`);
  return `${CLASS_TOPIC_ROOT}/${deviceClassId}/freshness`;
}

/** True for the exact freshness topic of some device class (no wildcards). */
export function isClassFreshnessTopic(topic: string): boolean {
  const parts = topic.split('/');
  return parts.length === 5 && `${parts[0]}/${parts[1]}/${parts[2]}` === CLASS_TOPIC_ROOT && DEVICE_CLASS_ID_PATTERN.test(parts[3]!) && parts[4] === 'freshness';
}
