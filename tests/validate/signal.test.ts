import { describe, expect, it } from 'vitest';
import { validate } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

// Worked by hand for the fixture at 100 cd/m², f/4, 1 ms, 5 µm pixels, QE 0.5, σd = 2 e⁻, K = 1 DN/e⁻:
//  q = (π/4)·0.9·0.98·cos⁴10° = 0.65157 (ISO 12232);  E = q·L/N² = 4.0723 lx;
//  at 550 nm, V = 0.99495 (CIE 1924): Ee = 4.0723/(683·0.99495) W/m² = 0.59927 µW/cm² (SI Brochure, 683 lm/W);
//  μp = A·E·t·λ/(hc) = 414.81 photons (≈ 50.34·25·1·0.55·0.59927, EMVA 1288);  μe = 0.5·μp = 207.40 e⁻;
//  SNR = μe/√(σd² + 1/12 + μe) = 14.262 → 23.08 dB (EMVA 1288 3.1).
const ELECTRONS_AT_100 = 207.4046;

describe('snr-dark (ISO 12232 q → irradiance at the design wavelength → EMVA 1288 photons and noise)', () => {
  it('23.08 dB at 100 cd/m² meets a 20 dB minimum', () => {
    const report = validate(fixture());
    const c = checkOf(report, 'snr-dark');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(23.0835, 2);
    expect(c.unit).toBe('dB');
    expect(c.message).toContain('207 e⁻ per pixel');
    expect(report.figures.snrDarkDb).toBeCloseTo(23.0835, 2);
  });
  it('fails against a 25 dB minimum by 1.92 dB and points at the exposure', () => {
    const c = checkOf(validate(fixture({ task: { minSnrDb: 25 } })), 'snr-dark');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('falls short of the task minimum of 25.0 dB by 1.92 dB');
    expect(c.path).toBe('camera.exposureUs');
  });
  it('a design wavelength outside 380–780 nm gives a failing check, not an exception', () => {
    const c = checkOf(validate(fixture({ deviceClass: { sensor: { designWavelengthNm: 850 } } })), 'snr-dark');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('cannot be estimated');
  });
});

describe('clipping-bright (saturation = min(full well, (2^bits − 1)/K), EMVA 1288 saturation capacity)', () => {
  // Signal is linear in luminance: 207.40 e⁻ per 100 cd/m²; saturation 20,000 e⁻ (full well; 16-bit ADC at K = 1).
  it('5,000 cd/m² gives 10,370 e⁻, 51.9 % of saturation: pass', () => {
    const c = checkOf(validate(fixture()), 'clipping-bright');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo((100 * ELECTRONS_AT_100 * 50) / 20000, 1);
    expect(c.unit).toBe('%');
  });
  it('9,000 cd/m² gives 93.3 % of saturation: warn (above the 90 % caution line)', () => {
    const c = checkOf(validate(fixture({ task: { luminanceMaxCdM2: 9000 } })), 'clipping-bright');
    expect(c.status).toBe('warn');
    expect(c.actual).toBeCloseTo(93.33, 1);
  });
  it('12,000 cd/m² would reach 124 % of saturation: fail', () => {
    const c = checkOf(validate(fixture({ task: { luminanceMaxCdM2: 12000 } })), 'clipping-bright');
    expect(c.status).toBe('fail');
    expect(c.actual).toBeCloseTo(124.44, 1);
    expect(c.path).toBe('camera.exposureUs');
  });
  it('with a 12-bit ADC at 8× gain the ADC saturates first (4095/8 = 512 e⁻) and the gain is blamed', () => {
    const c = checkOf(
      validate(fixture({ deviceClass: { sensor: { bitDepth: 12 } }, profile: { camera: { analogGain: 8 } } })),
      'clipping-bright',
    );
    expect(c.status).toBe('fail');
    expect(c.message).toContain('saturation is 512 e⁻, set by the ADC range at gain 8.00×');
    expect(c.path).toBe('camera.analogGain');
  });
});

describe('exposure-fits-frame (exposure ≤ 1/frame rate, common practice)', () => {
  it('1 ms fits the 33,333 µs period at 30 Hz', () => {
    const c = checkOf(validate(fixture()), 'exposure-fits-frame');
    expect(c.status).toBe('pass');
    expect(c.limit).toBeCloseTo(33333.33, 1);
    expect(c.unit).toBe('us');
  });
  it('40 ms does not, by 6,667 µs', () => {
    const c = checkOf(validate(fixture({ profile: { camera: { exposureUs: 40000 } } })), 'exposure-fits-frame');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('by 6667 µs');
  });
});
