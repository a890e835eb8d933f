import { describe, expect, it } from 'vitest';
import {
  cos4FallOff,
  countFromIlluminance,
  d65RelativePower,
  degToRad,
  illuminanceToIrradianceUwCm2,
  illuminantARelativePower,
  photonsPerPixel,
  planckRadianceWPerSrM3,
  spectralFactors,
} from '../../src/physics/index.js';

const flat = { quantumEfficiency: 1, transmission: 1 };

describe('illuminants (CIE 15:2004, Colorimetry)', () => {
  it('illuminant A is 100 at 560 nm and follows its defining formula: 9.7951 at 380 nm, 59.861 at 500 nm, 241.675 at 780 nm (CIE 15 table values, from memory)', () => {
    expect(illuminantARelativePower(560)).toBeCloseTo(100, 10);
    expect(illuminantARelativePower(380)).toBeCloseTo(9.7951, 3);
    expect(illuminantARelativePower(500)).toBeCloseTo(59.8611, 3);
    expect(illuminantARelativePower(780)).toBeCloseTo(241.675, 2);
  });
  it("illuminant A is a Planckian radiator at 2856 K: Planck's law with the exact SI h, c, k matches its relative spectrum within 0.2 % from 300 to 1100 nm (CIE's c₂ = 1.435e7 nm·K at 2848 K against today's 1.4388e7 at 2856 K)", () => {
    const planckAt = (l: number) => (100 * planckRadianceWPerSrM3(l, 2856)) / planckRadianceWPerSrM3(560, 2856);
    for (const l of [300, 380, 450, 560, 700, 850, 1100]) {
      expect(Math.abs(planckAt(l) / illuminantARelativePower(l) - 1)).toBeLessThan(2e-3);
    }
  });
  it("Planck's law: a 5778 K black body peaks near 501 nm (Wien's displacement law, b = 2.898e-3 m·K)", () => {
    let best = 0;
    let bestL = 0;
    for (let l = 300; l <= 1100; l++) {
      const v = planckRadianceWPerSrM3(l, 5778);
      if (v > best) [best, bestL] = [v, l];
    }
    expect(bestL).toBeGreaterThanOrEqual(500);
    expect(bestL).toBeLessThanOrEqual(502);
  });
  it('D65 is normalised to 100 at 560 nm and tabulated from 300 to 830 nm: 0.0341 at 300 nm, 117.812 at 460 nm, 60.3125 at 830 nm (CIE 15 Table T.1)', () => {
    expect(d65RelativePower(560)).toBe(100);
    expect(d65RelativePower(300)).toBe(0.0341);
    expect(d65RelativePower(460)).toBe(117.812);
    expect(d65RelativePower(830)).toBe(60.3125);
    expect(d65RelativePower(555)).toBeCloseTo((104.046 + 100) / 2, 10);
    expect(d65RelativePower(900)).toBe(0);
  });
});

describe('lux to photons through V(λ) (SI Brochure, 9th ed.: 683 lm/W at 540 THz; CIE 1924 V(λ))', () => {
  it('monochromatic 555 nm light has a luminous efficacy of 683 lm/W (the candela definition, 540 THz ≈ 555 nm)', () => {
    expect(spectralFactors({ type: 'monochromatic', wavelengthNm: 555 }, flat).luminousEfficacyLmPerW).toBeCloseTo(683, 10);
  });
  it('a monochromatic 555 nm case equals the monochromatic photon count: μp = A·E·t·λ/(hc) at Ee = Ev/(683·V(λ)) (EMVA 1288)', () => {
    const f = spectralFactors({ type: 'monochromatic', wavelengthNm: 555 }, flat);
    const viaSpectrum = countFromIlluminance(f.photonsPerLmS!, 2.5, 3, 10);
    const viaMonochromatic = photonsPerPixel(illuminanceToIrradianceUwCm2(2.5, 555), 3, 10, 555);
    expect(viaSpectrum).toBeCloseTo(viaMonochromatic, 9);
  });
  it('a 660 nm line gives (660/550)·V(550)/V(660) = 1.2·0.99495/0.061 = 19.57× the photons per lux of a 550 nm line (CIE 1924 V(λ); photon energy hc/λ)', () => {
    const at = (l: number) => spectralFactors({ type: 'monochromatic', wavelengthNm: l }, flat).photonsPerLmS!;
    expect(at(660) / at(550)).toBeCloseTo(19.5728, 3);
  });
  it('illuminant A and D65 behind an ideal 700 nm IR cut give 2.9–3.0× the photons per lux of 550 nm light (integrated over the CIE tables)', () => {
    const mono = spectralFactors({ type: 'monochromatic', wavelengthNm: 550 }, flat).photonsPerLmS!;
    const a = spectralFactors({ type: 'cie-a' }, { ...flat, irCutNm: 700 }).photonsPerLmS! / mono;
    const d = spectralFactors({ type: 'cie-d65' }, { ...flat, irCutNm: 700 }).photonsPerLmS! / mono;
    expect(a).toBeGreaterThan(2.9);
    expect(a).toBeLessThan(3.05);
    expect(d).toBeGreaterThan(2.85);
    expect(d).toBeLessThan(3.0);
  });
  it('a narrow-band 850 nm NIR LED carries no lux: photons per lux is null, photons per joule is λ/(hc) at its centre within 1 %', () => {
    const f = spectralFactors({ type: 'nir', centreNm: 850, widthNm: 40 }, flat);
    expect(f.photonsPerLmS).toBeNull();
    // λ/(hc) at 850 nm = 850e-9 / (6.62607015e-34 · 299792458) = 4.279e18 photons per joule (SI exact h, c).
    expect(f.photonsPerJ / 4.279e18).toBeCloseTo(1, 2);
    expect(f.bandNm![0]).toBeGreaterThan(780);
    expect(f.bandNm![1]).toBeLessThan(920);
  });
  it('an ideal IR cut at 650 nm passes nothing above it: the band ends at 650 nm', () => {
    const f = spectralFactors({ type: 'cie-a' }, { ...flat, irCutNm: 650 });
    expect(f.bandNm![1]).toBe(650);
    expect(spectralFactors({ type: 'nir', centreNm: 850, widthNm: 40 }, { ...flat, irCutNm: 650 }).electronsPerJ).toBeLessThan(1e10);
  });
  it('a QE curve that is 0 below 400 nm moves the band\'s lower edge to 400 nm', () => {
    const curve = [{ wavelengthNm: 400, value: 0 }, { wavelengthNm: 401, value: 0.5 }, { wavelengthNm: 1000, value: 0.5 }];
    const f = spectralFactors({ type: 'cie-d65' }, { ...flat, quantumEfficiencyCurve: curve });
    expect(f.bandNm![0]).toBe(401);
  });
});

describe('relative illumination (cos⁴ law)', () => {
  it('cos⁴ 20° = 0.780', () => {
    expect(cos4FallOff(degToRad(20))).toBeCloseTo(0.7797, 4);
  });
});
