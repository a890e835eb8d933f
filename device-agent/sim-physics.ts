/**
 * Actuation times of the SIMULATED driver: simple kinematic estimates from the device-class figures,
 * not measurements of any real lens or accelerator.
 */

/** Focus travel time: dioptres moved (|1/d₂ − 1/d₁|, dioptre = reciprocal metre, common practice) × settle time per dioptre. A lens at power-on is taken to rest at infinity (0 D). */
export function focusTravelMs(fromFocusM: number | null, toFocusM: number, settleMsPerDioptre: number): number {
  const fromDioptres = fromFocusM === null ? 0 : 1 / fromFocusM;
  return Math.abs(1 / toFocusM - fromDioptres) * settleMsPerDioptre;
}

/** Index of the lens stop nearest to an f-number. */
export function nearestStopIndex(fNumber: number, stops: readonly number[]): number {
  let best = 0;
  stops.forEach((s, i) => {
    if (Math.abs(s - fNumber) < Math.abs(stops[best]! - fNumber)) best = i;
  });
  return best;
}

/** Aperture travel: stops moved × time per stop; at power-on the iris rests wide open (stop 0). */
export function apertureTravelMs(fromFNumber: number | null, toFNumber: number, stops: readonly number[], stepMs: number): number {
  const from = fromFNumber === null ? 0 : nearestStopIndex(fromFNumber, stops);
  return Math.abs(nearestStopIndex(toFNumber, stops) - from) * stepMs;
}

/** Weights load time: size ÷ flash read rate (MB = 10⁶ bytes). */
export function weightsLoadMs(sizeBytes: number, flashReadMbPerS: number): number {
  return (sizeBytes / (flashReadMbPerS * 1e6)) * 1000;
}
