import { describe, expect, it } from 'vitest';
import { validate } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

// Worked by hand for the fixture at 100 cd/m², f/4 focused at 1 m with a 10 mm lens, 1 ms, 5 µm pixels, QE 0.5,
// σd = 2 e⁻, K = 1 DN/e⁻, no scene description (light taken at the 550 nm design wavelength):
//  working f-number N_w = N·(1 + f/(s − f)) = 4·(1 + 10/990) = 4.0404 (thin lens);
//  the corner of the 5 × 4 mm sensor is at atan(3.2016/10) = 17.75°, cos⁴ = 0.82270 (cos⁴ law);
//  E = (π/4)·v·cos⁴θ·L/N_w² with v = 0.98 (ISO 12232 without T); T = 0.9 and V(550) = 0.99495 (CIE 1924),
//  683 lm/W (SI Brochure) and μp = A·E·t·λ/(hc) (EMVA 1288) give 355.60 photons at the corner, 432.23 at the centre;
//  μe = 0.5·μp = 177.80 e⁻ (corner); SNR = μe/√(σd² + 1/12 + μe) = 13.184 → 22.40 dB (EMVA 1288 R4.0).
const CENTRE_ELECTRONS_AT_100 = 216.11399;

describe('snr-dark (darkest pixel at the image corner: ISO 12232 focal plane, cos⁴ law, EMVA 1288 photons and noise)', () => {
  it('22.40 dB at 100 cd/m² meets a 20 dB minimum, and the message names the corner and the light', () => {
    const report = validate(fixture());
    const c = checkOf(report, 'snr-dark');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(22.40064, 3);
    expect(c.unit).toBe('dB');
    expect(c.message).toContain('178 e⁻ per pixel');
    expect(c.message).toContain('image corner');
    expect(c.message).toContain('one design wavelength is assumed');
    expect(report.figures.snrDarkDb).toBeCloseTo(22.40064, 3);
  });
  it('fails against a 25 dB minimum by 2.60 dB and points at the exposure', () => {
    const c = checkOf(validate(fixture({ task: { minSnrDb: 25 } })), 'snr-dark');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('falls short of the task minimum of 25.0 dB by 2.60 dB');
    expect(c.path).toBe('camera.exposureUs');
  });
  it('a design wavelength outside 380–780 nm gives a failing check, not an exception', () => {
    const c = checkOf(validate(fixture({ deviceClass: { sensor: { designWavelengthNm: 850 } } })), 'snr-dark');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('cannot be estimated');
  });
});

describe('clipping-bright (saturation = min(full well, (2^bits − 1)/K), EMVA 1288 saturation capacity)', () => {
  // Signal at the image centre is linear in luminance: 216.11 e⁻ per 100 cd/m²; saturation 20,000 e⁻ (full well; 16-bit ADC at K = 1).
  it('5,000 cd/m² gives 10,806 e⁻ at the centre, 54.0 % of saturation: pass', () => {
    const c = checkOf(validate(fixture()), 'clipping-bright');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo((100 * CENTRE_ELECTRONS_AT_100 * 50) / 20000, 2);
    expect(c.unit).toBe('%');
    expect(c.message).toContain('image centre');
  });
  it('8,500 cd/m² gives 91.8 % of saturation: warn (above the 90 % caution line)', () => {
    const c = checkOf(validate(fixture({ task: { luminanceMaxCdM2: 8500 } })), 'clipping-bright');
    expect(c.status).toBe('warn');
    expect(c.actual).toBeCloseTo((100 * CENTRE_ELECTRONS_AT_100 * 85) / 20000, 2);
  });
  it('12,000 cd/m² would reach 129.7 % of saturation: fail', () => {
    const c = checkOf(validate(fixture({ task: { luminanceMaxCdM2: 12000 } })), 'clipping-bright');
    expect(c.status).toBe('fail');
    expect(c.actual).toBeCloseTo(129.668, 2);
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
