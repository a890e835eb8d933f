import type { SceneLightResult } from '../physics/scene-signal.js';
import type { DeviceClass, Task } from '../schema/index.js';

/**
 * The spectral integrals of a scene's light through a device class's optics, computed once per (task, device
 * class) object pair: every validation of the same documents reuses them.
 */
const byTask = new WeakMap<Task, WeakMap<DeviceClass, SceneLightResult>>();

export function cachedSceneLight(task: Task, deviceClass: DeviceClass, compute: () => SceneLightResult): SceneLightResult {
  let byDevice = byTask.get(task);
  if (!byDevice) {
    byDevice = new WeakMap();
    byTask.set(task, byDevice);
  }
  let r = byDevice.get(deviceClass);
  if (!r) {
    r = compute();
    byDevice.set(deviceClass, r);
  }
  return r;
}
