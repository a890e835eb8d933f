/** One measured-vs-predicted pair, weighted (by the frames it averages over). */
export interface RatioSample {
  measured: number;
  predicted: number;
  weight: number;
}

/** The fitted ratio measured ÷ predicted with its spread. */
export interface RatioFit {
  /** k of measured ≈ k · predicted; null without usable samples. */
  factor: number | null;
  /** Weighted root-mean-square of the relative residuals (m − k·p) ÷ (k·p); null without usable samples. */
  residualSpread: number | null;
}

/**
 * Weighted least squares through the origin: k = Σ w·m·p ÷ Σ w·p² minimises Σ w·(m − k·p)²
 * (regression through the origin; Eisenhauer, "Regression through the Origin", Teaching Statistics 25(3), 2003).
 * Samples with a non-positive weight or prediction carry no information about k and are left out.
 */
export function fitThroughOrigin(samples: readonly RatioSample[]): RatioFit {
  let smp = 0;
  let spp = 0;
  let sw = 0;
  for (const s of samples) {
    if (!(s.weight > 0) || !(s.predicted > 0) || !Number.isFinite(s.measured)) continue;
    smp += s.weight * s.measured * s.predicted;
    spp += s.weight * s.predicted * s.predicted;
    sw += s.weight;
  }
  if (spp === 0) return { factor: null, residualSpread: null };
  const k = smp / spp;
  if (!(k > 0)) return { factor: k, residualSpread: null };
  let sr = 0;
  for (const s of samples) {
    if (!(s.weight > 0) || !(s.predicted > 0) || !Number.isFinite(s.measured)) continue;
    const r = (s.measured - k * s.predicted) / (k * s.predicted);
    sr += s.weight * r * r;
  }
  return { factor: k, residualSpread: Math.sqrt(sr / sw) };
}

/** How much telemetry a fit needs before the fleet uses it (see /work/notes/fleet-readme.md). */
export const CALIBRATION_MINIMUM = {
  /** A device class: at least 20 telemetry windows and 1,000 frames, from at least 3 devices. */
  deviceClass: { windows: 20, frames: 1000, devices: 3 },
  /** One device: at least 10 telemetry windows. */
  device: { windows: 10, frames: 0, devices: 1 },
} as const;

/** Only the latest windows of each device are fitted, so a calibration follows the units as they are now. */
export const RECENT_WINDOWS_PER_DEVICE = 200;

export interface SampleCounts {
  windows: number;
  frames: number;
  devices: number;
}

export function isEnough(counts: SampleCounts, minimum: SampleCounts): boolean {
  return counts.windows >= minimum.windows && counts.frames >= minimum.frames && counts.devices >= minimum.devices;
}
