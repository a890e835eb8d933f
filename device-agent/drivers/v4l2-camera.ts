/**
 * Linux cameras through V4L2 controls, set with `v4l2-ctl` from Debian's v4l-utils. At start the
 * control list (ranges, steps, menus, flags) and the frame rate are read; a release whose profiles need a
 * control the camera lacks, or a setting outside the module's calibration, is refused before anything
 * moves. Each switch writes the modes (manual exposure, autofocus off) when they are not yet set, then the
 * frame rate, then the values, and reads every control back: a write the device refuses, or a value it
 * clamped beyond the tolerance, fails the step so the agent restores the previous profile.
 */
import type { Release } from '../../src/protocol/release.js';
import type { CameraPart } from './parts.js';
import { describeToolEnd, type ToolRunner } from './run-tool.js';
import { parseControlList, parseFrameRate, parseGetControls, type V4l2Control } from './v4l2-ctl-output.js';
import { planCamera, type ControlWrite } from './v4l2-plan.js';

export interface V4l2CameraOptions {
  tools: ToolRunner;
  /** Device node, e.g. /dev/video0 or /dev/v4l/by-id/usb-...-video-index0. */
  device: string;
  /** The v4l2-ctl program (looked up on PATH unless a path is given). */
  program: string;
  /** 'auto', or the name of the gain control. */
  gainControl: string;
  /** Allowed read-back difference, in percent of the requested code (never less than one step). */
  tolerancePct: number;
  timeoutMs: number;
}

export function createV4l2Camera(options: V4l2CameraOptions): CameraPart {
  const { tools, device, program } = options;
  let controls = new Map<string, V4l2Control>();
  let frameRate: { fps: number; settable: boolean } | null = null;
  /** What the device holds, as last read back. */
  const held = new Map<string, number>();

  async function tool(args: string[], what: string): Promise<string> {
    const r = await tools.run(program, ['-d', device, ...args], { timeoutMs: options.timeoutMs });
    if (r.code !== 0 || r.timedOut) throw new Error(`v4l2 ${device}: ${what} failed: ${describeToolEnd(program, r, options.timeoutMs)}`);
    return r.stdout;
  }

  function allowed(c: V4l2Control | undefined, code: number): number {
    return Math.max(c?.step || 1, (Math.abs(code) * options.tolerancePct) / 100);
  }

  async function writeAndCheck(writes: ControlWrite[], what: string): Promise<void> {
    if (writes.length === 0) return;
    const set = writes.map((w) => `${w.control}=${w.code}`).join(',');
    const get = writes.map((w) => w.control).join(',');
    let out: string;
    try {
      out = await tool([`--set-ctrl=${set}`, `--get-ctrl=${get}`], `setting ${what} (${set})`);
    } catch (e) {
      // A refused write may still have changed some controls: forget what we thought it held.
      for (const w of writes) held.delete(w.control);
      throw e;
    }
    const read = parseGetControls(out);
    const off: string[] = [];
    for (const w of writes) {
      const got = read.get(w.control);
      if (got === undefined) {
        held.delete(w.control);
        off.push(`${w.control} was not read back`);
        continue;
      }
      held.set(w.control, got);
      const c = controls.get(w.control);
      if (Math.abs(got - w.code) > allowed(c, w.code)) {
        const range = c ? `; the camera lists ${c.min} to ${c.max} in steps of ${c.step}` : '';
        off.push(`${w.control} reads ${got} after writing ${w.code} (${w.meaning}), beyond the tolerance of ±${allowed(c, w.code)}${range}`);
      }
    }
    if (off.length > 0) throw new Error(`v4l2 ${device}: the camera did not take the settings: ${off.join('; ')}`);
  }

  async function setFrameRate(hz: number): Promise<void> {
    if (frameRate && Math.abs(frameRate.fps - hz) < 1e-3) return;
    const out = await tool([`--set-parm=${hz}`], `setting the frame rate to ${hz} fps`);
    const got = parseFrameRate(out);
    if (!got) throw new Error(`v4l2 ${device}: v4l2-ctl did not report the frame rate it set (asked ${hz} fps)`);
    frameRate = { fps: got.fps, settable: true };
    if (Math.abs(got.fps - hz) > (hz * options.tolerancePct) / 100) {
      throw new Error(`v4l2 ${device}: the camera runs ${got.fps} fps after asking for ${hz} fps, beyond the tolerance of ${options.tolerancePct} %`);
    }
  }

  return {
    name: `v4l2 ${device}`,
    start: async function start() {
      controls = parseControlList(await tool(['--list-ctrls-menus'], 'reading the control list'));
      if (controls.size === 0) throw new Error(`v4l2 ${device}: v4l2-ctl listed no controls`);
      for (const c of controls.values()) held.set(c.name, c.value);
      frameRate = parseFrameRate(await tool(['--get-parm'], 'reading the frame rate'));
    },
    checkRelease: function checkRelease(release: Release): string | null {
      const stops = new Set(Object.values(release.tasks).map((t) => t.camera.fNumber));
      if (stops.size > 1 && !release.deviceClass.controls?.iris) {
        return `its tasks ask for f-numbers ${[...stops].map((n) => `f/${n}`).join(', ')} but device class ${release.deviceClass.id} has no iris table (controls.iris), so this camera's aperture stays fixed`;
      }
      for (const [name, task] of Object.entries(release.tasks)) {
        const plan = planCamera(controls, release.deviceClass, task.camera, task.frameRateHz, { gainControl: options.gainControl, frameRateSettable: frameRate?.settable ?? false });
        if (!plan.ok) return `task ${name}: ${plan.reason}`;
      }
      return null;
    },
    applyCamera: async function applyCamera(settings, target) {
      const plan = planCamera(controls, target.deviceClass, settings, target.task.frameRateHz, { gainControl: options.gainControl, frameRateSettable: frameRate?.settable ?? false });
      if (!plan.ok) throw new Error(`v4l2 ${device}: ${plan.reason}`);
      // Modes first, in their own write: a UVC camera refuses exposure and focus values while their automatic modes are on.
      await writeAndCheck(plan.modes.filter((m) => held.get(m.control) !== m.code), 'manual modes');
      // The frame rate before the exposure: with a longer frame period the camera no longer clamps a longer exposure.
      if (plan.frameRateHz !== null) await setFrameRate(plan.frameRateHz);
      await writeAndCheck(plan.values, `task ${target.taskName}`);
    },
  };
}
