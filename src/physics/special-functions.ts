/** Special functions the image-quality model needs: Bessel J1, the disc transform jinc, and sinc. */

/**
 * Bessel function of the first kind, order 1. Polynomial approximations of Abramowitz & Stegun,
 * *Handbook of Mathematical Functions* (1964), 9.4.4 for |x| ≤ 3 (|error| < 1.3e-8 in J1(x)/x) and
 * 9.4.6 for |x| > 3 (|error| < 1.1e-8 in the modulus and 9e-8 in the phase).
 */
export function besselJ1(x: number): number {
  const ax = Math.abs(x);
  if (ax <= 3) {
    const y = (x / 3) * (x / 3);
    return x * (0.5 + y * (-0.56249985 + y * (0.21093573 + y * (-0.03954289 + y * (0.00443319 + y * (-0.00031761 + y * 0.00001109))))));
  }
  const z = 3 / ax;
  const f1 = 0.79788456 + z * (0.00000156 + z * (0.01659667 + z * (0.00017105 + z * (-0.00249511 + z * (0.00113653 - z * 0.00020033)))));
  const theta1 = ax - 2.35619449 + z * (0.12499612 + z * (0.0000565 + z * (-0.00637879 + z * (0.00074348 + z * (0.00079824 - z * 0.00029166)))));
  const j = (f1 * Math.cos(theta1)) / Math.sqrt(ax);
  return x < 0 ? -j : j;
}

/** 2·J1(u)/u, the Fourier transform of a uniform disc, 1 at u = 0 (Goodman, *Introduction to Fourier Optics*, §2.1). */
export function jinc(u: number): number {
  if (Math.abs(u) < 1e-8) return 1;
  return (2 * besselJ1(u)) / u;
}

/** sin(πx)/(πx), 1 at x = 0: the transform of a unit-width rectangle (Goodman, *Introduction to Fourier Optics*, §2.1). */
export function sinc(x: number): number {
  if (Math.abs(x) < 1e-8) return 1;
  const px = Math.PI * x;
  return Math.sin(px) / px;
}

/** First positive zero of J1, 3.8317059702 (Abramowitz & Stegun, table 9.5). */
export const J1_FIRST_ZERO = 3.8317059702;

/** Bisection for the root of a decreasing function on [lo, hi] (f(lo) > 0 > f(hi)). */
function decreasingRoot(f: (x: number) => number, lo: number, hi: number): number {
  let a = lo;
  let b = hi;
  for (let i = 0; i < 80; i++) {
    const m = (a + b) / 2;
    if (f(m) > 0) a = m;
    else b = m;
  }
  return (a + b) / 2;
}

/** u where jinc(u) = ½ on its main lobe (≈ 2.2152): the MTF50 of a uniform disc of diameter b is at ν = u/(π·b). */
export const JINC_HALF = decreasingRoot((u) => jinc(u) - 0.5, 0, J1_FIRST_ZERO);

/** x where sinc(x) = ½ on its main lobe (≈ 0.6034): the MTF50 of a box of width a is at ν = x/a. */
export const SINC_HALF = decreasingRoot((x) => sinc(x) - 0.5, 0, 1);
