import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  absoluteSensitivityThresholdPhotons,
  maxSnr,
  motionBlurPx,
  maxExposureUsForBlur,
  photonsPerPixel,
  pixelSignal,
  saturationElectrons,
  sceneElectronsPerPixel,
  snrOfElectrons,
} from '../../src/physics/index.js';

const sensor = { quantumEfficiency: 0.6, darkNoiseE: 3, gainDnPerE: 0.25, fullWellE: 10_000, bitDepth: 12, analogGain: 1 };

describe('EMVA 1288 release 3.1 linear camera model', () => {
  it('photons per pixel follow μp = A·E·t·λ/(hc) ≈ 50.34·A[µm²]·t[ms]·λ[µm]·E[µW/cm²]', () => {
    expect(photonsPerPixel(1, 1, 1, 1_000)).toBeCloseTo(50.34, 2);
    // 3 µm pixel, 10 ms, 550 nm, 2 µW/cm²: 50.34 · 9 · 10 · 0.55 · 2 = 4,983.7
    expect(photonsPerPixel(2, 3, 10, 550) / 4_983.66).toBeCloseTo(1, 4);
  });

  it('SNR = μe/√(σd² + σq²/K² + μe) with σq² = 1/12 DN²: 10,000 e⁻, σd 10 e⁻, K 0.1 DN/e⁻ gives 99.46 (hand-worked)', () => {
    // √(100 + (1/12)/0.01 + 10,000) = √10,108.33 = 100.540; 10,000/100.540 = 99.463
    expect(snrOfElectrons(10_000, 10, 0.1)).toBeCloseTo(99.463, 3);
  });

  it('maximum SNR is √μe,sat: 10,000 e⁻ gives 100 (40 dB)', () => {
    expect(maxSnr(10_000)).toBe(100);
  });

  it('saturation is the full well or the ADC range, whichever fills first: 4,095 DN / 0.5 DN/e⁻ = 8,190 e⁻ < 10,000 e⁻', () => {
    expect(saturationElectrons(10_000, 12, 0.5, 1)).toBe(8_190);
    expect(saturationElectrons(10_000, 12, 0.25, 1)).toBe(10_000);
    // Analog gain 4 multiplies K: 4,095 / (0.25·4) = 4,095 e⁻.
    expect(saturationElectrons(10_000, 12, 0.25, 4)).toBe(4_095);
  });

  it('pixelSignal clips at saturation, flags it, and reports SNR in dB as 20·log10', () => {
    const bright = pixelSignal({ ...sensor, photons: 1e6 });
    expect(bright.saturated).toBe(true);
    expect(bright.electrons).toBe(10_000);
    expect(bright.snr).toBeCloseTo(snrOfElectrons(10_000, 3, 0.25), 12);
    expect(bright.snr).toBeLessThan(maxSnr(10_000));
    const dim = pixelSignal({ ...sensor, photons: 1_000 });
    expect(dim.saturated).toBe(false);
    expect(dim.electrons).toBeCloseTo(600, 12);
    expect(dim.snrDb).toBeCloseTo(20 * Math.log10(dim.snr), 12);
  });

  it('absolute sensitivity threshold μp,min = (1/η)(σy,dark/K + ½): η 0.5, σd 2 e⁻, K 1 gives 5.04 photons', () => {
    // σy,dark = √(K²σd² + 1/12) = √4.0833 = 2.0207 DN; (2.0207/1 + 0.5)/0.5 = 5.0415
    expect(absoluteSensitivityThresholdPhotons(0.5, 2, 1)).toBeCloseTo(5.0415, 3);
  });

  it('at the sensitivity threshold the SNR is about 1 (EMVA 1288 definition of the threshold)', () => {
    const photons = absoluteSensitivityThresholdPhotons(0.6, 5, 0.3);
    const s = pixelSignal({ ...sensor, darkNoiseE: 5, gainDnPerE: 0.3, photons });
    expect(s.snr).toBeGreaterThan(0.95);
    expect(s.snr).toBeLessThan(1.05);
  });

  it('property: SNR grows with exposure until saturation, then stays at the saturation value', () => {
    fc.assert(
      fc.property(
        fc.double({ min: 0, max: 1e5, noNaN: true }),
        fc.double({ min: 1, max: 10, noNaN: true }),
        fc.double({ min: 1, max: 16, noNaN: true }),
        (photons, factor, gain) => {
          const a = pixelSignal({ ...sensor, analogGain: gain, photons });
          const b = pixelSignal({ ...sensor, analogGain: gain, photons: photons * factor });
          expect(b.electrons).toBeGreaterThanOrEqual(a.electrons);
          if (!a.saturated && photons > 1 && factor > 1.01) expect(b.snr).toBeGreaterThan(a.snr);
          else expect(b.snr).toBeGreaterThanOrEqual(a.snr);
          if (a.saturated) expect(b.snr).toBe(a.snr);
        },
      ),
    );
  });

  it('scene luminance to electrons chains E = qL/N² (ISO 12232), 683 lm/W·V(λ) (SI) and the 50.34 constant (EMVA 1288)', () => {
    // 100 cd/m² at f/2.8, q 0.65: 8.2908 lx; at 550 nm V = 0.99495: 8.2908/(683·0.99495)·100 = 1.22004 µW/cm²
    // 3 µm, 10 ms: 50.34·9·10·0.55·1.22004 = 3,040.1 photons; η 0.6 → 1,824.1 e⁻
    const electrons = sceneElectronsPerPixel({
      luminanceCdM2: 100,
      fNumber: 2.8,
      exposureUs: 10_000,
      pixelPitchUm: 3,
      quantumEfficiency: 0.6,
      wavelengthNm: 550,
      q: 0.65,
    });
    expect(electrons / 1_824.1).toBeCloseTo(1, 3);
  });
});

describe('motion blur v·t·f/(d·p) (pinhole camera model, similar triangles; common practice)', () => {
  it('1 m/s for 1 ms at 2 m with an 8 mm lens and 2 µm pixels smears 2 px (hand-worked: 1 mm · 8/2,000 = 4 µm)', () => {
    expect(motionBlurPx(1, 1_000, 8, 2, 2)).toBeCloseTo(2, 12);
  });

  it('the longest exposure for a 1 px budget in that case is 500 µs; a still scene allows any exposure', () => {
    expect(maxExposureUsForBlur(1, 1, 8, 2, 2)).toBeCloseTo(500, 9);
    expect(maxExposureUsForBlur(1, 0, 8, 2, 2)).toBe(Infinity);
  });
});
