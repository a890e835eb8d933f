import { describe, expect, it } from 'vitest';
import {
  ev100,
  exposureValue,
  focalPlaneExposureLxS,
  focalPlaneIlluminanceLx,
  illuminanceToIrradianceUwCm2,
  isoQ,
  meterExposureS,
  photopicEfficiency,
} from '../../src/physics/index.js';

describe('exposure value (ISO 2720:1974)', () => {
  it('f/1 for 1 s is EV 0, and f/8 at 1/125 s is EV 12.97 (EV = log2(N²/t))', () => {
    expect(exposureValue(1, 1)).toBe(0);
    expect(exposureValue(8, 1 / 125)).toBeCloseTo(Math.log2(8_000), 12);
  });

  it('EV100 subtracts log2(S/100): f/1, 1 s at ISO 200 is EV100 −1', () => {
    expect(ev100(1, 1, 100)).toBe(0);
    expect(ev100(1, 1, 200)).toBeCloseTo(-1, 12);
  });
});

describe('reflected-light meter equation N²/t = L·S/K (ISO 2720:1974, K = 12.5 cd/m²)', () => {
  it('EV100 0 corresponds to L = K/100 = 0.125 cd/m²: f/1 at ISO 100 meters 1 s', () => {
    expect(meterExposureS(0.125, 1, 100)).toBeCloseTo(1, 12);
  });

  it('1,000 cd/m² at f/8 and ISO 100 meters 1/125 s (N²·K/(L·S) = 64·12.5/100,000)', () => {
    expect(meterExposureS(1_000, 8, 100)).toBeCloseTo(1 / 125, 12);
  });

  it('K within the ISO 2720 range 10.6–13.4 scales the time in proportion', () => {
    expect(meterExposureS(1_000, 8, 100, 10.6) / meterExposureS(1_000, 8, 100, 13.4)).toBeCloseTo(10.6 / 13.4, 12);
  });
});

describe('focal-plane illuminance and exposure (ISO 12232)', () => {
  it('q = (π/4)·T·v·cos⁴θ with T = 0.9, v = 0.98, θ = 10° is ≈ 0.65 (ISO 12232)', () => {
    expect(isoQ()).toBeCloseTo(0.6516, 4);
    expect(Math.round(isoQ() * 100) / 100).toBe(0.65);
  });

  it('H = q·L·t/N²: 1,000 cd/m² at f/4 for 10 ms with q = 0.65 gives 0.40625 lx·s (hand-worked)', () => {
    expect(focalPlaneExposureLxS(1_000, 4, 0.01, 0.65)).toBeCloseTo(0.40625, 12);
    expect(focalPlaneIlluminanceLx(1_000, 4, 0.65)).toBeCloseTo(40.625, 12);
  });
});

describe('lux to irradiance (SI Brochure, 9th ed.: 683 lm/W at 540 THz; CIE 1924 V(λ))', () => {
  it('683 lx of 555 nm light carries 1 W/m² = 100 µW/cm²', () => {
    expect(photopicEfficiency(555)).toBe(1);
    expect(illuminanceToIrradianceUwCm2(683, 555)).toBeCloseTo(100, 10);
  });

  it('V(510 nm) = 0.503 and V(650 nm) = 0.107 (CIE 1924 table, Wyszecki & Stiles 1982)', () => {
    expect(photopicEfficiency(510)).toBeCloseTo(0.503, 6);
    expect(photopicEfficiency(650)).toBeCloseTo(0.107, 6);
    expect(illuminanceToIrradianceUwCm2(683, 510)).toBeCloseTo(100 / 0.503, 8);
  });

  it('interpolates linearly between 10 nm table points: V(545) is the mean of V(540) = 0.954 and V(550) = 0.99495', () => {
    expect(photopicEfficiency(545)).toBeCloseTo((0.954 + 0.99495) / 2, 10);
  });

  it('refuses a near-infrared wavelength, where lux carries no power information', () => {
    expect(() => illuminanceToIrradianceUwCm2(100, 850)).toThrow(/outside the photopic range/);
  });
});
