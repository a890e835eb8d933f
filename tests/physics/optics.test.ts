import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  airyDiameterUm,
  blurCircleMm,
  depthOfFieldMm,
  fieldOfViewDeg,
  focusForRangeMm,
  hyperfocalDistanceMm,
  mtfCutoffCyclesPerMm,
  objectPixelSizeMm,
  totalBlurPx,
} from '../../src/physics/index.js';

describe('hyperfocal distance and depth of field (thin lens, Greenleaf 1950)', () => {
  const f = 50;
  const n = 8;
  const c = 0.03;
  const h = hyperfocalDistanceMm(f, n, c);

  it('50 mm at f/8 with c = 0.03 mm has H = 10,467 mm (Greenleaf, "Photographic Optics", 1950: H = f²/(Nc) + f; worked by hand)', () => {
    expect(h).toBeCloseTo(10_466.67, 1);
    expect(Math.round(h)).toBe(10_467);
  });

  it('focused at H the near limit is H/2 and the far limit is infinity (Greenleaf 1950, definition of hyperfocal distance)', () => {
    const dof = depthOfFieldMm(f, n, c, h);
    expect(dof.nearMm).toBeCloseTo(h / 2, 6);
    expect(dof.farMm).toBe(Infinity);
  });

  it('focused at H/2 = 5,233 mm the near limit is 3,489 mm within 0.2 % (worked example; its 3,489 is the approximation Hs/(H+s) = H/3, the exact form gives 3,494 mm)', () => {
    const dof = depthOfFieldMm(f, n, c, h / 2);
    expect(dof.nearMm).toBeCloseTo(3_494.5, 0);
    expect(Math.abs(dof.nearMm - 3_489) / 3_489).toBeLessThan(0.002);
  });

  it('focused at H/2 the far limit is finite, H − f = 10,417 mm (Greenleaf form s(H−f)/(H−s); the far limit only reaches infinity when focused at H or beyond)', () => {
    const dof = depthOfFieldMm(f, n, c, h / 2);
    expect(dof.farMm).toBeCloseTo(h - f, 6);
    expect(Number.isFinite(dof.farMm)).toBe(true);
  });

  it('the blur circle at the depth-of-field limits equals the circle of confusion (consistency of the Greenleaf forms with b = (|d−s|/d)·f²/(N(s−f)))', () => {
    for (const s of [600, 2_000, h / 2, h * 0.9]) {
      const dof = depthOfFieldMm(f, n, c, s);
      expect(blurCircleMm(f, n, s, dof.nearMm)).toBeCloseTo(c, 9);
      if (Number.isFinite(dof.farMm)) expect(blurCircleMm(f, n, s, dof.farMm)).toBeCloseTo(c, 9);
    }
    // Focused at H, an object at infinity blurs to exactly c (definition of H).
    expect(blurCircleMm(f, n, h, Infinity)).toBeCloseTo(c, 12);
  });

  it('refuses a focus distance inside the focal length, where the lens forms no real image (thin-lens equation)', () => {
    expect(() => depthOfFieldMm(50, 8, 0.03, 40)).toThrow(/focal length/);
    expect(blurCircleMm(50, 8, 40, 1_000)).toBe(Infinity);
  });

  it('property: depth of field grows as the aperture closes (Greenleaf forms: H falls as N rises)', () => {
    fc.assert(
      fc.property(
        fc.double({ min: 2, max: 100, noNaN: true }),
        fc.double({ min: 1, max: 16, noNaN: true }),
        fc.double({ min: 1.01, max: 4, noNaN: true }),
        fc.double({ min: 0.001, max: 0.1, noNaN: true }),
        fc.double({ min: 1.5, max: 1_000, noNaN: true }),
        (focal, n1, ratio, coc, focusFactor) => {
          const s = focal * focusFactor;
          const wide = depthOfFieldMm(focal, n1, coc, s);
          const narrow = depthOfFieldMm(focal, n1 * ratio, coc, s);
          expect(narrow.nearMm).toBeLessThanOrEqual(wide.nearMm * (1 + 1e-12));
          expect(narrow.farMm).toBeGreaterThanOrEqual(wide.farMm * (1 - 1e-12));
        },
      ),
    );
  });

  it('property: defocus blur is zero at the focus distance and grows away from it on each side (b = (|d−s|/d)·f²/(N(s−f)))', () => {
    fc.assert(
      fc.property(
        fc.double({ min: 2, max: 100, noNaN: true }),
        fc.double({ min: 1, max: 22, noNaN: true }),
        fc.double({ min: 2, max: 1_000, noNaN: true }),
        fc.double({ min: 0.05, max: 0.95, noNaN: true }),
        fc.double({ min: 0.05, max: 0.95, noNaN: true }),
        (focal, n, focusFactor, t1, t2) => {
          const s = focal * focusFactor;
          expect(blurCircleMm(focal, n, s, s)).toBe(0);
          const [a, b] = t1 < t2 ? [t1, t2] : [t2, t1];
          // Nearer side: the further the object is in front of s, the larger the blur.
          const nearFar = s * (1 - b);
          const nearClose = s * (1 - a);
          expect(blurCircleMm(focal, n, s, nearFar)).toBeGreaterThanOrEqual(blurCircleMm(focal, n, s, nearClose));
          expect(blurCircleMm(focal, n, s, nearClose)).toBeGreaterThan(0);
          // Farther side: blur rises with distance beyond s.
          const farClose = s * (1 + a);
          const farFar = s * (1 + 10 * b);
          expect(blurCircleMm(focal, n, s, farFar)).toBeGreaterThanOrEqual(blurCircleMm(focal, n, s, farClose));
          expect(blurCircleMm(focal, n, s, farClose)).toBeGreaterThan(0);
        },
      ),
    );
  });
});

describe('focus for a working range', () => {
  it('the harmonic mean 2ab/(a+b) equalises defocus blur at both ends (derived from b ∝ |1 − s/d|)', () => {
    const s = focusForRangeMm(1_000, 3_000);
    expect(s).toBe(1_500);
    expect(blurCircleMm(16, 4, s, 1_000)).toBeCloseTo(blurCircleMm(16, 4, s, 3_000), 12);
  });

  it('with the far end at infinity the focus is twice the near distance (limit of 2ab/(a+b))', () => {
    const s = focusForRangeMm(800, Infinity);
    expect(s).toBe(1_600);
    expect(blurCircleMm(16, 4, s, 800)).toBeCloseTo(blurCircleMm(16, 4, s, Infinity), 12);
  });
});

describe('diffraction (Born & Wolf; Goodman)', () => {
  it('Airy disk diameter at 550 nm and f/8 is 10.7 µm (2.44·λ·N, Born & Wolf, "Principles of Optics", §8.5, from memory)', () => {
    expect(airyDiameterUm(550, 8)).toBeCloseTo(10.736, 3);
    expect(Math.round(airyDiameterUm(550, 8) * 10) / 10).toBe(10.7);
  });

  it('incoherent MTF cutoff at 550 nm and f/8 is 227 cycles/mm (1/(λN), Goodman)', () => {
    expect(mtfCutoffCyclesPerMm(550, 8)).toBeCloseTo(227.27, 2);
  });
});

describe('geometry', () => {
  it('a 50 mm lens across a 36 mm frame width sees 39.6° (2·atan(w/2f); common practice figure for full-frame "normal" lenses)', () => {
    expect(fieldOfViewDeg(50, 36)).toBeCloseTo(39.6, 1);
  });

  it('one 3 µm pixel behind a 10 mm lens covers 0.3 mm at 1 m (d·p/f, similar triangles of the pinhole camera model, common practice; hand-worked)', () => {
    expect(objectPixelSizeMm(1_000, 3, 10)).toBeCloseTo(0.3, 12);
  });

  it('defocus 3 µm and Airy 4 µm combine in quadrature to 5 µm, 2.5 px at 2 µm pitch (root-sum-square, common practice)', () => {
    expect(totalBlurPx(0.003, 4, 2)).toBeCloseTo(2.5, 12);
    expect(totalBlurPx(0, 4, 2)).toBeCloseTo(2, 12);
  });
});
