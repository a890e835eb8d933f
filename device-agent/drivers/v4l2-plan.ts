/**
 * Which V4L2 controls a camera profile needs and the code each takes: pure, from the device's control
 * list and the device class's calibration tables. Used both to check a release before it is accepted
 * and to build each switch.
 */
import { focusCodeFor, interpolateCode } from '../../src/physics/control-calibration.js';
import { usToV4l2ExposureUnits } from '../../src/physics/units.js';
import type { DeviceClass } from '../../src/schema/device-class.js';
import type { CameraSettings } from '../../src/schema/profile.js';
import type { V4l2Control } from './v4l2-ctl-output.js';

/** Older kernels name some camera controls differently (renamed in Linux 5.x; common practice to accept both). */
const ALIASES: Record<string, string[]> = {
  auto_exposure: ['exposure_auto'],
  exposure_time_absolute: ['exposure_absolute'],
  focus_automatic_continuous: ['focus_auto'],
};

export interface ControlWrite {
  control: string;
  code: number;
  /** What the code stands for, for messages: "exposure 2000 µs". */
  meaning: string;
}

export type CameraPlan =
  | { ok: true; modes: ControlWrite[]; values: ControlWrite[]; frameRateHz: number | null }
  | { ok: false; reason: string };

export interface PlanOptions {
  /** 'auto': analogue_gain when the device has it (sensor drivers), else gain (UVC). */
  gainControl: string;
  /** Whether the device takes a frame rate (VIDIOC_S_PARM with timeperframe). */
  frameRateSettable: boolean;
}

export function findControl(controls: ReadonlyMap<string, V4l2Control>, name: string): V4l2Control | undefined {
  return controls.get(name) ?? (ALIASES[name] ?? []).map((a) => controls.get(a)).find(Boolean);
}

function lacks(controls: ReadonlyMap<string, V4l2Control>, name: string, why: string): CameraPlan {
  return { ok: false, reason: `needs the V4L2 control ${name} (${why}), which this camera does not offer; it has: ${[...controls.keys()].join(', ')}` };
}

/** Snaps a code onto the control's grid (min + k·step); the V4L2 core does the same on write. */
const onGrid = (c: V4l2Control, code: number) => c.min + Math.round((code - c.min) / (c.step || 1)) * (c.step || 1);

export function planCamera(
  controls: ReadonlyMap<string, V4l2Control>, deviceClass: DeviceClass, settings: CameraSettings, frameRateHz: number, options: PlanOptions,
): CameraPlan {
  const modes: ControlWrite[] = [];
  const values: ControlWrite[] = [];
  const cal = deviceClass.controls ?? {};

  const exposure = findControl(controls, 'exposure_time_absolute');
  if (!exposure) return lacks(controls, 'exposure_time_absolute', `exposure ${settings.exposureUs} µs`);
  const autoExposure = findControl(controls, 'auto_exposure');
  if (autoExposure) {
    // V4L2_EXPOSURE_MANUAL = 1 (Linux kernel V4L2 camera control reference).
    const manual = autoExposure.menu.find((m) => /manual/i.test(m.name))?.index ?? 1;
    modes.push({ control: autoExposure.name, code: manual, meaning: 'manual exposure' });
  }
  values.push({ control: exposure.name, code: onGrid(exposure, Math.round(usToV4l2ExposureUnits(settings.exposureUs))), meaning: `exposure ${settings.exposureUs} µs` });

  const gainName = options.gainControl === 'auto' ? (controls.has('analogue_gain') ? 'analogue_gain' : 'gain') : options.gainControl;
  const gain = controls.get(gainName);
  if (!gain) return lacks(controls, gainName, `analogue gain ${settings.analogGain}×`);
  if (!cal.gain) return { ok: false, reason: `device class ${deviceClass.id} has no gain calibration table (controls.gain) to turn ${settings.analogGain}× into a ${gainName} code` };
  const gainCode = interpolateCode(cal.gain.points, settings.analogGain, `gain ${settings.analogGain}× (controls.gain):`);
  if (!gainCode.ok) return { ok: false, reason: gainCode.reason };
  values.push({ control: gain.name, code: onGrid(gain, gainCode.code), meaning: `gain ${settings.analogGain}×` });

  const focus = findControl(controls, 'focus_absolute');
  if (cal.focus && !focus) return lacks(controls, 'focus_absolute', `focus ${settings.focusDistanceM} m; the device class has a focus table`);
  if (focus) {
    if (!cal.focus) return { ok: false, reason: `the camera has focus_absolute but device class ${deviceClass.id} has no focus calibration table (controls.focus) to turn ${settings.focusDistanceM} m into a focus code` };
    const focusCode = focusCodeFor(cal.focus, settings.focusDistanceM);
    if (!focusCode.ok) return { ok: false, reason: `${focusCode.reason} (controls.focus)` };
    const autoFocus = findControl(controls, 'focus_automatic_continuous');
    if (autoFocus) modes.push({ control: autoFocus.name, code: 0, meaning: 'autofocus off' });
    values.push({ control: focus.name, code: onGrid(focus, focusCode.code), meaning: `focus ${settings.focusDistanceM} m` });
  }

  const iris = controls.get('iris_absolute');
  if (cal.iris) {
    if (!iris) return lacks(controls, 'iris_absolute', `f/${settings.fNumber}; the device class has an iris table`);
    const irisCode = interpolateCode(cal.iris.points, settings.fNumber, `f-number ${settings.fNumber} (controls.iris):`);
    if (!irisCode.ok) return { ok: false, reason: irisCode.reason };
    values.push({ control: iris.name, code: onGrid(iris, irisCode.code), meaning: `f/${settings.fNumber}` });
  }
  return { ok: true, modes, values, frameRateHz: options.frameRateSettable ? frameRateHz : null };
}
