import { z } from 'zod';
import { idSchema, nonNegative, positive } from './common.js';
import type { DeviceClass } from './device-class.js';
import type { InputIssue } from './issues.js';

export const cameraSettingsSchema = z.strictObject({
  focusDistanceM: positive(),
  fNumber: positive(),
  exposureUs: positive(),
  analogGain: positive().refine((g) => g >= 1, { message: 'must be at least 1 (unity gain)' }),
});

export const memoryPartitionSchema = z.strictObject({
  weightBufferKib: nonNegative(),
  activationBufferKib: nonNegative(),
});

export const profileSchema = z.strictObject({
  kind: z.literal('profile').optional(),
  id: idSchema,
  name: z.string().min(1).max(200).optional(),
  demoData: z.boolean().optional(),
  notes: z.string().max(4000).optional(),
  taskId: idSchema,
  deviceClassId: idSchema,
  modelId: idSchema,
  camera: cameraSettingsSchema,
  memory: memoryPartitionSchema,
});

export type Profile = z.infer<typeof profileSchema>;
export type CameraSettings = z.infer<typeof cameraSettingsSchema>;
export type MemoryPartition = z.infer<typeof memoryPartitionSchema>;

/**
 * Settings a device class cannot physically take. These are input errors, not validation findings:
 * a lens cannot open wider than its widest stop or focus nearer than its mechanics allow.
 */
export function physicalLimitIssues(profile: Profile, deviceClass: DeviceClass): InputIssue[] {
  const issues: InputIssue[] = [];
  const { lens, sensor, accelerator } = deviceClass;
  const widest = lens.fNumberStops[0]!;
  const narrowest = lens.fNumberStops[lens.fNumberStops.length - 1]!;
  if (profile.camera.fNumber < widest - 1e-9) {
    issues.push({ path: 'camera.fNumber', message: `f/${profile.camera.fNumber} is wider than the lens's widest stop f/${widest}` });
  } else if (profile.camera.fNumber > narrowest + 1e-9) {
    issues.push({ path: 'camera.fNumber', message: `f/${profile.camera.fNumber} is narrower than the lens's narrowest stop f/${narrowest}` });
  }
  if (profile.camera.focusDistanceM < lens.nearestFocusM - 1e-12) {
    issues.push({
      path: 'camera.focusDistanceM',
      message: `focus ${profile.camera.focusDistanceM} m is nearer than the lens can focus (${lens.nearestFocusM} m)`,
    });
  }
  if (profile.camera.analogGain > sensor.maxAnalogGain) {
    issues.push({ path: 'camera.analogGain', message: `gain ${profile.camera.analogGain}× exceeds the sensor's maximum ${sensor.maxAnalogGain}×` });
  }
  const partitionKib = profile.memory.weightBufferKib + profile.memory.activationBufferKib;
  if (partitionKib > accelerator.sramKib + 1e-9) {
    issues.push({
      path: 'memory',
      message: `weight + activation buffers ${partitionKib} KiB exceed the accelerator's ${accelerator.sramKib} KiB of on-chip SRAM`,
    });
  }
  return issues;
}
