import type { DeviceStateRecord } from '../store/device-state.js';
import type { Store } from '../store/store.js';

/**
 * The weights (sha256) a device may download: those of the release assigned to it, the release it
 * reports running (its cache may have lost a file) and the release it reports waiting with. A device
 * has no business with any other model's weights.
 */
export function weightsInScope(store: Store, deviceId: string, state: DeviceStateRecord | null): Set<string> {
  const device = store.devices.get(deviceId);
  const ids = new Set<string>();
  if (device?.assignedReleaseId) ids.add(device.assignedReleaseId);
  if (state?.releaseId) ids.add(state.releaseId);
  const pending = (state?.state as { pending?: { releaseId?: unknown } } | null)?.pending?.releaseId;
  if (typeof pending === 'string') ids.add(pending);
  const hashes = new Set<string>();
  for (const id of ids) {
    const record = store.releases.get(id);
    if (!record || record.deviceClassId !== device?.deviceClassId) continue;
    for (const task of Object.values(record.parsed.release.tasks)) hashes.add(task.model.sha256);
  }
  return hashes;
}
