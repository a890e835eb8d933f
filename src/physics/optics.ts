/**
 * Thin-lens optics. Distances along the axis are in millimetres and measured from the lens;
 * blur is a spot diameter on the sensor. The formulas are the standard photographic ones
 * (Greenleaf, "Photographic Optics", 1950; Ray, "Applied Photographic Optics", 3rd ed., 2002).
 */
import { mmToUm, nmToMm, nmToUm, radToDeg, umToMm } from './units.js';

/** Hyperfocal distance H = f²/(N·c) + f (Greenleaf 1950). */
export function hyperfocalDistanceMm(focalLengthMm: number, fNumber: number, cocMm: number): number {
  return (focalLengthMm * focalLengthMm) / (fNumber * cocMm) + focalLengthMm;
}

export interface DepthOfFieldMm {
  nearMm: number;
  /** Infinity when the focus distance is at or beyond the hyperfocal distance. */
  farMm: number;
}

/**
 * Near and far limits of acceptable sharpness for a circle of confusion c.
 * Near = s(H−f)/(H+s−2f); far = s(H−f)/(H−s), infinite when s ≥ H (Greenleaf 1950).
 * Throws RangeError when s ≤ f: the lens forms no real image there.
 */
export function depthOfFieldMm(focalLengthMm: number, fNumber: number, cocMm: number, focusDistanceMm: number): DepthOfFieldMm {
  const f = focalLengthMm;
  const s = focusDistanceMm;
  if (!(s > f)) {
    throw new RangeError(`focus distance ${s} mm must be longer than the focal length ${f} mm`);
  }
  const h = hyperfocalDistanceMm(f, fNumber, cocMm);
  const nearMm = (s * (h - f)) / (h + s - 2 * f);
  const farMm = s >= h ? Infinity : (s * (h - f)) / (h - s);
  return { nearMm, farMm };
}

/**
 * Defocus blur-circle diameter on the sensor for an object at d when focused at s:
 * b = (|d − s| / d) · f² / (N·(s − f)) (thin lens, similar triangles; Ray 2002).
 * An object at infinity gives f²/(N(s−f)). Returns Infinity when s ≤ f (no real image).
 */
export function blurCircleMm(focalLengthMm: number, fNumber: number, focusDistanceMm: number, objectDistanceMm: number): number {
  const f = focalLengthMm;
  const s = focusDistanceMm;
  const d = objectDistanceMm;
  if (!(s > f)) return Infinity;
  const defocusRatio = d === Infinity ? 1 : Math.abs(d - s) / d;
  return (defocusRatio * f * f) / (fNumber * (s - f));
}

/** Airy disk diameter to the first dark ring, 2.44·λ·N (Born & Wolf, "Principles of Optics"). */
export function airyDiameterUm(wavelengthNm: number, fNumber: number): number {
  return 2.44 * nmToUm(wavelengthNm) * fNumber;
}

/** Incoherent diffraction-limited MTF cutoff, 1/(λ·N) (Goodman, "Introduction to Fourier Optics"). */
export function mtfCutoffCyclesPerMm(wavelengthNm: number, fNumber: number): number {
  return 1 / (nmToMm(wavelengthNm) * fNumber);
}

/** Angular field of view across one sensor dimension, 2·atan(size / 2f) (rectilinear lens focused at infinity). */
export function fieldOfViewDeg(focalLengthMm: number, sensorSizeMm: number): number {
  return radToDeg(2 * Math.atan(sensorSizeMm / (2 * focalLengthMm)));
}

/** Size in the object plane covered by one pixel, d·p/f (pinhole approximation, valid for d ≫ f). */
export function objectPixelSizeMm(distanceMm: number, pixelPitchUm: number, focalLengthMm: number): number {
  return (distanceMm * umToMm(pixelPitchUm)) / focalLengthMm;
}

/**
 * Total blur spot in pixels: defocus and diffraction spot diameters combined in quadrature,
 * √(b² + airy²) / p. Root-sum-square is a common approximation that treats both spots as
 * roughly Gaussian (common practice); it is neither exact for a uniform defocus disc nor for an Airy pattern.
 */
export function totalBlurPx(defocusBlurMm: number, airyDiameterUm: number, pixelPitchUm: number): number {
  return Math.hypot(mmToUm(defocusBlurMm), airyDiameterUm) / pixelPitchUm;
}

/**
 * Focus distance that gives equal defocus blur at a near and a far distance.
 * From b(d) ∝ |d − s| / d = |1 − s/d| with a < s < b: s/a − 1 = 1 − s/b, so s = 2ab/(a+b),
 * the harmonic mean of the two distances. With b = ∞ this tends to 2a.
 */
export function focusForRangeMm(nearMm: number, farMm: number): number {
  if (farMm === Infinity) return 2 * nearMm;
  return (2 * nearMm * farMm) / (nearMm + farMm);
}

/** Diagonal of a sensor, for the diagonal field of view. */
export function sensorDiagonalMm(widthMm: number, heightMm: number): number {
  return Math.hypot(widthMm, heightMm);
}
