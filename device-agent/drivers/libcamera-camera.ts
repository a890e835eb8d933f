/**
 * Cameras on a libcamera stack (for example a CSI module driven by a picamera2 or libcamera-apps
 * process). The agent does not own the camera there: it writes the controls, in libcamera's own names
 * and units, to a JSON file the camera process reads (replaced atomically, with a rising `seq`), and,
 * when `appliedFile` is set, waits for the camera process to write back the request metadata it got
 * for that `seq`, comparing each value within the tolerance. The hand-off is documented in
 * device-agent/README.md ("libcamera-style driver").
 */
import { existsSync, readFileSync } from 'node:fs';
import { mToDioptres, sToUs } from '../../src/physics/units.js';
import { writeFileAtomic } from '../atomic-file.js';
import type { CameraPart } from './parts.js';

export const LIBCAMERA_HANDOFF_FORMAT = 'ocellus.libcamera-controls/1';

export interface LibcameraOptions {
  controlsFile: string;
  appliedFile?: string;
  tolerancePct: number;
  timeoutMs: number;
  /** Polling of the applied file; a test hands in a shorter one. */
  pollMs?: number;
}

/** libcamera control ids (libcamera control_ids_core.yaml): AfModeManual = 0. */
const AF_MODE_MANUAL = 0;

export function createLibcameraCamera(o: LibcameraOptions): CameraPart {
  let seq = Date.now();
  const wait = (ms: number) => new Promise((r) => setTimeout(r, ms));

  async function applied(mySeq: number): Promise<Record<string, number>> {
    const deadline = performance.now() + o.timeoutMs;
    while (performance.now() < deadline) {
      if (existsSync(o.appliedFile!)) {
        try {
          const doc = JSON.parse(readFileSync(o.appliedFile!, 'utf8')) as { seq?: number; metadata?: Record<string, number>; error?: string };
          if (doc.seq === mySeq) {
            if (doc.error) throw new Error(`libcamera: the camera process refused the controls: ${doc.error}`);
            return doc.metadata ?? {};
          }
        } catch (e) {
          if ((e as Error).message.startsWith('libcamera:')) throw e;
          // A half-written file from a writer that does not rename: read it again next time.
        }
      }
      await wait(o.pollMs ?? 5);
    }
    throw new Error(`libcamera: no metadata for controls seq ${mySeq} in ${o.appliedFile} within ${o.timeoutMs} ms; is the camera process running?`);
  }

  return {
    name: `libcamera (${o.controlsFile})`,
    applyCamera: async function applyCamera(settings, target) {
      seq += 1;
      const mySeq = seq;
      const frameDurationUs = Math.round(sToUs(1 / target.task.frameRateHz));
      const controls = {
        AfMode: AF_MODE_MANUAL,
        // LensPosition is in dioptres (libcamera control_ids_core.yaml); 0 is infinity.
        LensPosition: mToDioptres(settings.focusDistanceM),
        AeEnable: false,
        ExposureTime: Math.round(settings.exposureUs),
        AnalogueGain: settings.analogGain,
        FrameDurationLimits: [frameDurationUs, frameDurationUs],
      };
      const doc = { format: LIBCAMERA_HANDOFF_FORMAT, seq: mySeq, releaseId: target.releaseId, task: target.taskName, fNumber: settings.fNumber, controls };
      await writeFileAtomic(o.controlsFile, `${JSON.stringify(doc, null, 2)}\n`);
      if (!o.appliedFile) return;
      const metadata = await applied(mySeq);
      const off: string[] = [];
      for (const key of ['LensPosition', 'ExposureTime', 'AnalogueGain'] as const) {
        const want = controls[key];
        const got = metadata[key];
        if (typeof got !== 'number') off.push(`${key} missing from the metadata`);
        else if (Math.abs(got - want) > Math.max(1e-6, (Math.abs(want) * o.tolerancePct) / 100)) off.push(`${key} is ${got}, asked ${want}`);
      }
      if (off.length > 0) throw new Error(`libcamera: the camera did not take the controls (tolerance ${o.tolerancePct} %): ${off.join('; ')}`);
    },
  };
}
