import { refuse, type Outcome } from '../../schema/refusal.js';
import type { DeviceRecord } from '../../store/devices.js';
import type { Store } from '../../store/store.js';

/** Why a device's enrolment or credentials could not change. */
export type EnrolmentRefusalCode = 'unknown-device-class' | 'device-enrolled' | 'device-not-found';

export interface EnrolmentContext {
  store: Store;
  actor: string;
  at: string;
}

/** A device and the MQTT password it was just given: shown once, stored only as a keyed hash. */
export interface IssuedCredentials {
  device: DeviceRecord;
  password: string;
}

/** Enrols a device of a stored class (tags deduplicated, order kept), with its audit entry. */
export function enrolDevice(
  input: { id: string; deviceClassId: string; tags: readonly string[] },
  ctx: EnrolmentContext,
): Outcome<IssuedCredentials, EnrolmentRefusalCode> {
  const { store, actor, at } = ctx;
  if (!store.documents.latest('device-class', input.deviceClassId)) {
    return refuse('unknown-device-class', 'unknown device class', [{ path: 'deviceClassId', message: `no device class '${input.deviceClassId}' is stored` }]);
  }
  const tags = [...new Set(input.tags)];
  return store.transaction(() => {
    const enrolled = store.devices.enrol({ id: input.id, deviceClassId: input.deviceClassId, tags, actor, at });
    if (!enrolled) return refuse('device-enrolled', `device '${input.id}' is already enrolled`);
    store.audit.record({ at, actor, action: 'device.enrol', target: `device/${input.id}`, detail: { deviceClassId: input.deviceClassId, tags } });
    return { ok: true as const, value: enrolled };
  });
}

/** A new password for a device (the old one stops working; a revoked device is reinstated), with its audit entry. */
export function rotateDevicePassword(deviceId: string, ctx: EnrolmentContext): Outcome<IssuedCredentials, EnrolmentRefusalCode> {
  const { store, actor, at } = ctx;
  return store.transaction(() => {
    const rotated = store.devices.rotatePassword(deviceId);
    if (!rotated) return refuse('device-not-found', `device '${deviceId}' not found`);
    store.audit.record({ at, actor, action: 'device.rotate-password', target: `device/${deviceId}`, detail: null });
    return { ok: true as const, value: rotated };
  });
}

/** Revokes a device's credentials (it cannot log in until its password is rotated), with its audit entry. */
export function revokeDevice(deviceId: string, ctx: EnrolmentContext): Outcome<DeviceRecord, EnrolmentRefusalCode> {
  const { store, actor, at } = ctx;
  return store.transaction(() => {
    const revoked = store.devices.revoke(deviceId, at);
    if (!revoked) return refuse('device-not-found', `device '${deviceId}' not found`);
    store.audit.record({ at, actor, action: 'device.revoke', target: `device/${deviceId}`, detail: { revokedAt: revoked.revokedAt } });
    return { ok: true as const, value: revoked };
  });
}
