import { chainBlurDiameterUm, diffractionCutoffCycPerMm } from '../../src/physics/index.js';
import { describe, expect, it } from 'vitest';
import { blurCircleMm } from '../../src/physics/optics.js';
import {
  gainLadder,
  geometricLadder,
  goldenSectionMin,
  memoryPartitions,
  paretoFront,
  refinedFocusM,
  startingFocusM,
  worstTotalBlurPx,
} from '../../src/plan/index.js';
import { resolveOptions, searchAxes } from '../../src/plan/search-space.js';
import { testDeviceClass, testTask } from '../support/plan-fixtures.js';

describe('focus for a working range', () => {
  // Worked example. Blur-circle diameter for an object at d when focused at s (thin lens; Greenleaf,
  // "Photographic Optics", 1950, as given in REFERENCES.md): b = (|d − s| / d) · f² / (N·(s − f)).
  // The factor f²/(N(s − f)) is common to both ends, so equal blur at a and b needs
  //   (s − a)/a = (b − s)/b  ⇒  s = 2ab/(a + b), the harmonic mean of the two distances.
  // a = 0.3 m, b = 1.2 m: s = 2·0.3·1.2/1.5 = 0.72/1.5 = 0.48 m.
  // With f = 6 mm, N = 4: |300 − 480|/300 = 0.6 and |1200 − 480|/1200 = 0.6, and
  // f²/(N(s − f)) = 36/(4·474) = 0.018987 mm, so b = 0.6 · 0.018987 = 0.011392 mm at both ends.
  it('starts at s = 2ab/(a+b): 0.3 m to 1.2 m gives 0.48 m (thin-lens blur circle, Greenleaf 1950)', () => {
    expect(startingFocusM(0.3, 1.2, 0.1)).toBeCloseTo(0.48, 12);
  });

  it('gives equal blur, 0.011392 mm, at both ends of 0.3–1.2 m focused at 0.48 m with f = 6 mm at f/4 (worked example above)', () => {
    const near = blurCircleMm(6, 4, 480, 300);
    const far = blurCircleMm(6, 4, 480, 1200);
    expect(near).toBeCloseTo(0.011392, 6);
    expect(far).toBeCloseTo(near, 12);
  });

  it('worsens the worse end when moved 10 % either way (the equal-blur point is the minimax; worked example above)', () => {
    const worst = (sMm: number) => Math.max(blurCircleMm(6, 4, sMm, 300), blurCircleMm(6, 4, sMm, 1200));
    // s = 432 mm: far end 0.64 · 36/(4·426) = 0.013521 mm.
    expect(worst(432)).toBeCloseTo(0.013521, 6);
    expect(worst(432)).toBeGreaterThan(worst(480));
    expect(worst(528)).toBeGreaterThan(worst(480));
  });

  it('tends to 2a when the far end is at infinity (limit of 2ab/(a+b), Greenleaf 1950 blur circle)', () => {
    expect(startingFocusM(0.5, Infinity, 0.1)).toBeCloseTo(1.0, 12);
  });

  it("is held at the lens's nearest focus when the closed form is nearer (common practice: a lens cannot focus closer)", () => {
    expect(startingFocusM(0.05, 0.2, 0.1)).toBe(0.1);
  });

  it('refined by golden-section search on the worst combined blur (diffraction and pixel included) it stays at 0.48 m', () => {
    const r = refinedFocusM(0.3, 1.2, 0.1, (s) => worstTotalBlurPx(testTask, testDeviceClass, 2.8, s));
    expect(r.focusM).toBeCloseTo(0.48, 6);
    // Both ends see the disc b = 0.6 · 36/(2.8·474) mm (thin lens); the chain adds diffraction at the working
    // f-number 2.8·(1 + 6/474) (N_w = N(1 + m)) and the 3 µm pixel, combined as one MTF.
    const defocusUm = 1000 * 0.6 * (36 / (2.8 * 474));
    const cutoffCycPerMm = diffractionCutoffCycPerMm(550, 2.8 * (1 + 6 / 474));
    expect(r.worstBlurPx).toBeCloseTo(chainBlurDiameterUm({ cutoffCycPerMm, defocusBlurUm: defocusUm, pixelApertureUm: 3, motionUm: 0 }) / 3, 6);
    expect(r.worstBlurPx).toBeGreaterThan(defocusUm / 3);
  });

  it('golden-section search finds the minimum of (x − 2)² on [0, 5] (Kiefer 1953)', () => {
    expect(goldenSectionMin((x) => (x - 2) ** 2, 0, 5).x).toBeCloseTo(2, 6);
  });

  it('puts the best focus first on the focus axis, rounded to 0.1 mm, spread values either side', () => {
    const axes = searchAxes(testTask, testDeviceClass, { focusSpread: [0.1] }, resolveOptions({ focusSpread: [0.1] }));
    expect(axes.focusDistancesM).toEqual([0.48, 0.432, 0.528]);
  });
});

describe('search ladders', () => {
  it('steps exposure by half stops (√2) from 50 µs and ends exactly on the frame period (common practice)', () => {
    const ladder = geometricLadder(50, 100_000, 2, 1);
    expect(ladder[0]).toBe(50);
    expect(ladder[1]).toBe(71);
    expect(ladder[2]).toBe(100);
    expect(ladder.at(-1)).toBe(100_000);
    expect(ladder.every((v, i) => i === 0 || v > ladder[i - 1]!)).toBe(true);
  });

  it('doubles analog gain up to the sensor maximum, which is always the last rung (common practice)', () => {
    expect(gainLadder(16)).toEqual([1, 2, 4, 8, 16]);
    expect(gainLadder(6)).toEqual([1, 2, 4, 6]);
    expect(gainLadder(1)).toEqual([1]);
  });

  it('splits SRAM into weight buffers in granule steps, the activation buffer taking the rest', () => {
    expect(memoryPartitions(256, 64)).toEqual([
      { weightBufferKib: 0, activationBufferKib: 256 },
      { weightBufferKib: 64, activationBufferKib: 192 },
      { weightBufferKib: 128, activationBufferKib: 128 },
      { weightBufferKib: 192, activationBufferKib: 64 },
      { weightBufferKib: 256, activationBufferKib: 0 },
    ]);
    expect(memoryPartitions(100, 64)).toEqual([
      { weightBufferKib: 0, activationBufferKib: 100 },
      { weightBufferKib: 64, activationBufferKib: 36 },
      { weightBufferKib: 100, activationBufferKib: 0 },
    ]);
  });

  it('optionally tries every smaller whole-granule activation buffer too', () => {
    const p = memoryPartitions(192, 64, true);
    expect(p.filter((x) => x.weightBufferKib === 0).map((x) => x.activationBufferKib)).toEqual([192, 128, 64]);
  });

  it('uses the lens stops and the gain ladder by default', () => {
    const axes = searchAxes(testTask, testDeviceClass, {}, resolveOptions({}));
    expect(axes.fNumbers).toEqual([2, 2.8, 4, 8]);
    expect(axes.analogGains).toEqual([1, 2, 4, 8]);
    expect(axes.exposuresUs.at(-1)).toBeCloseTo(100_000, 6);
  });
});

describe('Pareto front (Deb, "Multi-Objective Optimization Using Evolutionary Algorithms", 2001, §2.4)', () => {
  const p = (energyMjPerFrame: number, predictedAccuracy: number, latencyMs: number) => ({ energyMjPerFrame, predictedAccuracy, latencyMs });

  it('keeps points no other point beats in every objective, and one of two equal points', () => {
    const a = p(1, 0.9, 20);
    const b = p(2, 0.95, 20); // more energy, more accuracy: both stay
    const c = p(2, 0.9, 25); // dominated by a
    const d = p(1, 0.9, 20); // equal to a: the first is kept
    const e = p(0.5, 0.8, 30); // least energy: stays
    const front = paretoFront([a, b, c, d, e]);
    expect(front).toHaveLength(3);
    expect(front[0]).toBe(a);
    expect(front[1]).toBe(b);
    expect(front[2]).toBe(e);
  });
});
