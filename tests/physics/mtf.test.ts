import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  J1_FIRST_ZERO,
  JINC_HALF,
  SINC_HALF,
  besselJ1,
  chainBlurDiameterUm,
  defocusMtf,
  diffractionCutoffCycPerMm,
  diffractionMtf,
  equivalentBlurDiameterUm,
  geometricDefocusMtf,
  jinc,
  magnificationAtFocus,
  motionMtf,
  mtf50CycPerMm,
  mtfParts,
  nyquistCycPerMm,
  pixelApertureUm,
  pixelMtf,
  sinc,
  stageBlurDiametersUm,
  systemMtf,
  workingFNumber,
} from '../../src/physics/index.js';
import type { ImageChain } from '../../src/physics/index.js';

/** J1 by its power series Σ (−1)^k (x/2)^(2k+1) / (k!(k+1)!) (Abramowitz & Stegun 9.1.10), an independent reference. */
function j1Series(x: number): number {
  let term = x / 2;
  let sum = term;
  for (let k = 1; k < 80; k++) {
    term *= (-(x * x) / 4) / (k * (k + 1));
    sum += term;
  }
  return sum;
}

describe('Bessel J1, jinc and sinc', () => {
  it('J1(1) = 0.4400505857, J1(2) = 0.5767248078, J1(5) = −0.3275791376 to 1e-7 (Abramowitz & Stegun, table 9.1; values from memory, confirmed by the series 9.1.10)', () => {
    expect(besselJ1(1)).toBeCloseTo(0.4400505857, 7);
    expect(besselJ1(2)).toBeCloseTo(0.5767248078, 7);
    expect(besselJ1(5)).toBeCloseTo(-0.3275791376, 7);
    for (const x of [1, 2, 5]) expect(besselJ1(x)).toBeCloseTo(j1Series(x), 7);
  });

  it("J1's first zero is 3.8317 (Abramowitz & Stegun, table 9.5)", () => {
    expect(J1_FIRST_ZERO).toBeCloseTo(3.8317, 4);
    expect(Math.abs(besselJ1(3.8317059702))).toBeLessThan(1e-7);
    expect(besselJ1(3.80)).toBeGreaterThan(0);
    expect(besselJ1(3.86)).toBeLessThan(0);
  });

  it('the polynomial J1 agrees with the power series (A&S 9.1.10) within 1e-7 on 0–20, and is odd (property, fast-check)', () => {
    fc.assert(
      fc.property(fc.double({ min: 0, max: 20, noNaN: true }), (x) => {
        expect(Math.abs(besselJ1(x) - j1Series(x))).toBeLessThan(1e-7);
        expect(besselJ1(-x)).toBe(-besselJ1(x));
      }),
    );
  });

  it('jinc(0) = 1 and sinc(0) = 1; sinc(½) = 2/π and sinc(1) = 0 (definition sin(πx)/(πx), Goodman §2.1)', () => {
    expect(jinc(0)).toBe(1);
    expect(sinc(0)).toBe(1);
    expect(sinc(0.5)).toBeCloseTo(2 / Math.PI, 12);
    expect(Math.abs(sinc(1))).toBeLessThan(1e-15);
  });

  it('the disc transform falls to ½ at u = 2.2151 and a box to ½ at x = 0.6034 (2J1(u)/u = ½ and sin(πx)/(πx) = ½ solved; from memory to 4 digits)', () => {
    expect(JINC_HALF).toBeCloseTo(2.2151, 3);
    expect(jinc(JINC_HALF)).toBeCloseTo(0.5, 10);
    expect(SINC_HALF).toBeCloseTo(0.6034, 4);
    expect(sinc(SINC_HALF)).toBeCloseTo(0.5, 10);
  });
});

describe('MTF of each stage', () => {
  it('diffraction MTF of a circular pupil at half the cutoff is 0.3910 (Goodman, Introduction to Fourier Optics, eq. 6-32)', () => {
    expect(diffractionMtf(0.5, 1)).toBeCloseTo(0.391, 4);
    expect(diffractionMtf(0, 1)).toBe(1);
    expect(diffractionMtf(1, 1)).toBe(0);
    expect(diffractionMtf(1.5, 1)).toBe(0);
  });

  it('the cutoff is 1/(λN): 550 nm at f/8 gives 227.3 cycles/mm (Goodman §6.3)', () => {
    expect(diffractionCutoffCycPerMm(550, 8)).toBeCloseTo(227.27, 2);
  });

  it('a 100 % fill square pixel passes 2/π at its Nyquist frequency (Boreman, MTF in Optical and Electro-Optical Systems, §2.2)', () => {
    const pitchUm = 3;
    expect(pixelMtf(nyquistCycPerMm(pitchUm), pixelApertureUm(pitchUm, 1))).toBeCloseTo(2 / Math.PI, 12);
  });

  it('a 25 % fill factor halves the aperture width, so at Nyquist the pixel passes sinc(¼) = 0.9003 (Boreman §2.2, square active area)', () => {
    expect(pixelApertureUm(3, 0.25)).toBeCloseTo(1.5, 12);
    expect(pixelMtf(nyquistCycPerMm(3), pixelApertureUm(3, 0.25))).toBeCloseTo(Math.sin(Math.PI / 4) / (Math.PI / 4), 12);
  });

  it('motion of one pixel during the exposure passes 2/π at Nyquist (Boreman §2.5, |sinc(mν)|)', () => {
    expect(motionMtf(nyquistCycPerMm(3), 3)).toBeCloseTo(2 / Math.PI, 12);
  });

  it("the defocus disc's first zero is at ν = 1.2197/b (J1's first zero 3.8317/π; A&S table 9.5)", () => {
    const bUm = 20;
    const zeroCycPerMm = 1.2197 / (bUm / 1000);
    expect(3.8317 / Math.PI).toBeCloseTo(1.2197, 4);
    expect(geometricDefocusMtf(zeroCycPerMm, bUm)).toBeLessThan(1e-4);
    expect(geometricDefocusMtf(zeroCycPerMm * 0.98, bUm)).toBeGreaterThan(0.005);
  });

  it("Stokseth's defocus factor tends to the geometric disc at low frequency and passes more near the cutoff (Stokseth, JOSA 59, 1969: argument shrunk by 1 − ν/ν_c)", () => {
    const cutoff = 200;
    expect(defocusMtf(1, 30, cutoff)).toBeCloseTo(geometricDefocusMtf(1, 30), 3);
    expect(defocusMtf(100, 10, cutoff)).toBeGreaterThan(geometricDefocusMtf(100, 10));
  });

  it('working f-number at 1:1 magnification doubles N (N_w = N(1 + m), thin lens)', () => {
    expect(workingFNumber(4, 1)).toBe(8);
    expect(magnificationAtFocus(50, 100)).toBe(1);
    expect(workingFNumber(4, magnificationAtFocus(50, 100))).toBe(8);
    expect(magnificationAtFocus(6, 6)).toBe(Infinity);
  });
});

const chain = (over: Partial<ImageChain> = {}): ImageChain => ({
  cutoffCycPerMm: diffractionCutoffCycPerMm(550, 4),
  defocusBlurUm: 12,
  pixelApertureUm: 3,
  motionUm: 6,
  ...over,
});

describe('system MTF and the figures derived from it', () => {
  it('the system MTF is the product of the stages (cascade of linear stages, Boreman §1.4)', () => {
    const c = chain();
    for (const nu of [10, 40, 90, 150]) {
      const parts = mtfParts(nu, c);
      expect(parts.system).toBeCloseTo(parts.diffraction * parts.defocus * parts.pixel * parts.motion, 15);
      expect(systemMtf(nu, c)).toBe(parts.system);
      expect(parts.diffraction).toBe(diffractionMtf(nu, c.cutoffCycPerMm));
      expect(parts.pixel).toBe(pixelMtf(nu, 3));
      expect(parts.motion).toBe(motionMtf(nu, 6));
    }
  });

  it('MTF50 is where the system MTF is ½', () => {
    const c = chain();
    expect(systemMtf(mtf50CycPerMm(c), c)).toBeCloseTo(0.5, 9);
  });

  it('the equivalent blur of a pure disc returns its diameter (disc MTF 2J1(πbν)/(πbν), Boreman §2.3)', () => {
    for (const bUm of [1, 7.5, 20, 300]) {
      const disc = { cutoffCycPerMm: Infinity, defocusBlurUm: bUm, pixelApertureUm: 0, motionUm: 0 };
      expect(chainBlurDiameterUm(disc)).toBeCloseTo(bUm, 6);
    }
    expect(equivalentBlurDiameterUm(JINC_HALF / (Math.PI * 0.02))).toBeCloseTo(20, 9);
  });

  it('an aberration-free f/4 lens on 3 µm pixels blurs like a 5.5 µm disc (diffraction 0.404·ν_c and the pixel combined; Goodman eq. 6-32, Boreman §2.2)', () => {
    const c = chain({ defocusBlurUm: 0, motionUm: 0 });
    expect(chainBlurDiameterUm(c)).toBeGreaterThan(5.4);
    expect(chainBlurDiameterUm(c)).toBeLessThan(5.6);
  });

  const chains = fc.record({
    cutoffCycPerMm: fc.double({ min: 50, max: 2000, noNaN: true }),
    defocusBlurUm: fc.double({ min: 0, max: 200, noNaN: true }),
    pixelApertureUm: fc.double({ min: 0.5, max: 10, noNaN: true }),
    motionUm: fc.double({ min: 0, max: 200, noNaN: true }),
  });

  it('the MTF never exceeds 1 at any frequency (property, fast-check)', () => {
    fc.assert(
      fc.property(chains, fc.double({ min: 0, max: 3000, noNaN: true }), (c, nu) => {
        const p = mtfParts(nu, c);
        for (const v of [p.diffraction, p.defocus, p.pixel, p.motion, p.system]) {
          expect(v).toBeGreaterThanOrEqual(0);
          expect(v).toBeLessThanOrEqual(1);
        }
      }),
    );
  });

  it('more of any blur source never raises the MTF below the MTF50, nor lowers the equivalent blur (property, fast-check)', () => {
    const grow = fc.constantFrom('defocusBlurUm', 'pixelApertureUm', 'motionUm', 'cutoffCycPerMm');
    fc.assert(
      fc.property(chains, grow, fc.double({ min: 1.01, max: 3, noNaN: true }), fc.double({ min: 0, max: 1, noNaN: true }), (given, key, k, at) => {
        let c = given;
        // A lower cutoff (larger working f-number) is more diffraction blur. With a fixed geometric disc it also
        // means fewer waves of defocus (b = 8·N·W020), which Stokseth's factor rewards, so it is tried in focus.
        const base = key === 'cutoffCycPerMm' ? { ...c, defocusBlurUm: 0 } : c;
        const worse = { ...base, [key]: key === 'cutoffCycPerMm' ? base[key] / k : base[key] * k };
        c = base;
        const nu = at * mtf50CycPerMm(worse);
        expect(systemMtf(nu, worse)).toBeLessThanOrEqual(systemMtf(nu, c) + 1e-12);
        expect(chainBlurDiameterUm(worse)).toBeGreaterThanOrEqual(chainBlurDiameterUm(c) * (1 - 1e-9));
      }),
    );
  });

  it('the combined blur is at least the largest single source (property, fast-check: the product is at most each factor)', () => {
    fc.assert(
      fc.property(chains, (c) => {
        const parts = stageBlurDiametersUm(c);
        const largest = Math.max(parts.diffraction, parts.defocus, parts.pixel, parts.motion);
        expect(chainBlurDiameterUm(c)).toBeGreaterThanOrEqual(largest * (1 - 1e-9));
      }),
    );
  });

  it('where diffraction dominates, the frequency model blurs less than a root-sum-square of spot diameters (Hopkins 1955 / Stokseth 1969 against the RSS approximation)', () => {
    // f/11, 550 nm: Airy disc 14.8 µm; defocus disc 10 µm; pixel and motion left out.
    const c = { cutoffCycPerMm: diffractionCutoffCycPerMm(550, 11), defocusBlurUm: 10, pixelApertureUm: 0, motionUm: 0 };
    const rss = Math.hypot(10, 2.44 * 0.55 * 11);
    expect(chainBlurDiameterUm(c)).toBeLessThan(0.85 * rss);
  });
});
