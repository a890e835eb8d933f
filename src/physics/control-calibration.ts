/**
 * From a physical camera setting to the integer code a module's control takes, through the module's
 * measured calibration table. Pure; no extrapolation beyond the measured points.
 */
import type { CalibrationPoint, FocusCalibration } from '../schema/camera-controls.js';
import { mToDioptres } from './units.js';

export type CodeResult = { ok: true; code: number } | { ok: false; reason: string };

/** Piecewise-linear interpolation between measured points, rounded to the nearest code (common practice for lookup tables). */
export function interpolateCode(points: readonly CalibrationPoint[], at: number, what: string): CodeResult {
  const sorted = [...points].sort((a, b) => a.at - b.at);
  const lo = sorted[0]!;
  const hi = sorted[sorted.length - 1]!;
  if (!Number.isFinite(at) || at < lo.at - 1e-9 || at > hi.at + 1e-9) {
    return { ok: false, reason: `${what} ${at} is outside the calibrated range ${lo.at} to ${hi.at}` };
  }
  for (let k = 1; k < sorted.length; k++) {
    const a = sorted[k - 1]!;
    const b = sorted[k]!;
    if (at <= b.at + 1e-9) {
      const t = Math.min(1, Math.max(0, (at - a.at) / (b.at - a.at)));
      return { ok: true, code: Math.round(a.code + t * (b.code - a.code)) };
    }
  }
  return { ok: true, code: hi.code };
}

/**
 * Focus code for a focus distance. Interpolated in dioptres: by the thin-lens equation the lens's
 * extension beyond f is f²/(d − f) ≈ f²·(1/d) for d ≫ f (Hecht, Optics, 5th ed., §5.2), so a voice-coil or
 * stepper focus code is close to linear in 1/d.
 */
export function focusCodeFor(calibration: FocusCalibration, focusDistanceM: number): CodeResult {
  const dioptres = mToDioptres(focusDistanceM);
  // Points in metres are turned into dioptres too, so interpolation stays linear in 1/d.
  const points = calibration.unit === 'dioptre' ? calibration.points : calibration.points.map((p) => ({ at: mToDioptres(p.at), code: p.code }));
  const r = interpolateCode(points, dioptres, 'focus');
  if (r.ok) return r;
  const at = calibration.points.map((p) => p.at);
  const range = calibration.unit === 'dioptre' ? `${Math.min(...at)} to ${Math.max(...at)} dioptres` : `${Math.min(...at)} m to ${Math.max(...at)} m`;
  return { ok: false, reason: `focus ${focusDistanceM} m (${Number(dioptres.toFixed(3))} dioptres) is outside the calibrated range ${range}` };
}
