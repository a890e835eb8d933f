import { describe, expect, it } from 'vitest';
import { chainBlurDiameterUm, diffractionCutoffCycPerMm } from '../../src/physics/index.js';
import { BLUR_SAMPLES, sampleDistancesM, toleratedBlurPx, validate } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

// Figures for the fixture (f = 10 mm, N = 4, p = 5 µm, λ = 550 nm, network 250 px wide on a 1000 px sensor, ×4):
//  blur circle b = (|d − s|/d)·f²/(N(s − f)) (thin lens, Ray 2002);
//  working f-number N(1 + f/(s − f)) (thin lens); cutoff 1/(λ·N_w) (Goodman §6.3);
//  combined blur = the disc with the system MTF50 (physics/mtf, tested against Goodman, Boreman and A&S).
const chainBlurPx = (defocusUm: number, focusM: number, fNumber = 4, motionUm = 0) =>
  chainBlurDiameterUm({ cutoffCycPerMm: diffractionCutoffCycPerMm(550, fNumber * (1 + 10 / (focusM * 1000 - 10))), defocusBlurUm: defocusUm, pixelApertureUm: 5, motionUm }) / 5;
const blurCircleUm = (dM: number, sM: number, fNumber = 4) => ((Math.abs(dM - sM) / dM) * 100 * 1000) / (fNumber * (sM * 1000 - 10));

describe('blur-over-range (the combined image: defocus, diffraction, pixel and motion as one MTF)', () => {
  it('focused at 1 m over 0.9–1.1 m the worst combined blur is at 0.9 m, within the default 2 input px (common practice)', () => {
    const report = validate(fixture());
    const c = checkOf(report, 'blur-over-range');
    const sensorPx = chainBlurPx(blurCircleUm(0.9, 1), 1);
    expect(c.status).toBe('pass');
    expect(report.figures.worstBlur.distanceM).toBe(0.9);
    expect(c.actual).toBeCloseTo(sensorPx / 4, 9);
    expect(c.limit).toBe(2);
    expect(c.unit).toBe('input px');
    expect(c.figures?.combinedSensorPx).toBeCloseTo(sensorPx, 9);
    expect(c.figures?.combinedInputPx).toBeCloseTo(sensorPx / 4, 9);
    expect(c.message).toMatch(/worst combined blur 1\.\d+ sensor px = 0\.\d+ input px after the ×4\.00 downscale at 0\.9 m/);
    expect(c.message).toContain('the default 2 input px (common practice)');
  });

  it('with a full-width network over 0.5–2 m no focus fixes it at f/4, so it points at the f-number', () => {
    // b(0.5 m) = 25.25 µm; best focus 2·0.5·2/2.5 = 0.8 m still leaves b(0.5 m) = 18.99 µm, far past 2 px of 5 µm.
    const c = checkOf(validate(fixture({ task: { nearDistanceM: 0.5, farDistanceM: 2 }, model: { inputWidthPx: 1000 } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.actual).toBeCloseTo(chainBlurPx(blurCircleUm(0.5, 1), 1), 9);
    expect(c.actual!).toBeGreaterThan(5);
    expect(c.message).toContain('0.8 m');
    expect(c.path).toBe('camera.fNumber');
  });

  it('a misplaced focus that a better focus would fix points at camera.focusDistanceM', () => {
    const c = checkOf(validate(fixture({ profile: { camera: { focusDistanceM: 2 } }, model: { inputWidthPx: 1000 } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.actual).toBeCloseTo(chainBlurPx(blurCircleUm(0.9, 2), 2), 9);
    expect(c.path).toBe('camera.focusDistanceM');
    expect(c.message).toMatch(/Focusing at 0\.99 m would bring the worst blur to 1\.\d+ input px/);
  });

  it('when diffraction alone exceeds the tolerance it says so (f/16: MTF50 at 0.404·ν_c, a 15.5 µm disc = 3.1 px)', () => {
    const c = checkOf(validate(fixture({ profile: { camera: { fNumber: 16 } }, model: { inputWidthPx: 1000 } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.path).toBe('camera.fNumber');
    expect(c.message).toContain('Diffraction alone');
  });

  it('motion during the exposure joins the same blur: 1 m/s for 2 ms at 0.9 m is a 4.4 px smear and the check points at the exposure', () => {
    const c = checkOf(validate(fixture({ task: { maxRelativeSpeedMPerS: 1 }, profile: { camera: { exposureUs: 2000 } }, model: { inputWidthPx: 1000 } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.actual).toBeCloseTo(chainBlurPx(blurCircleUm(0.9, 1), 1, 4, (2 * 10) / 900 * 1000), 9);
    expect(c.path).toBe('camera.exposureUs');
  });

  it('where diffraction dominates the combined blur is below the old root-sum-square of spot diameters (Hopkins 1955, Stokseth 1969)', () => {
    const report = validate(fixture({ profile: { camera: { fNumber: 11 } } }));
    for (const p of report.figures.blurCurve) {
      const rss = Math.hypot(p.defocusPx, (2.44 * 0.55 * 11 * (1 + 10 / 990)) / 5);
      expect(p.totalPx).toBeLessThan(rss);
    }
  });
});

describe('blur tolerance from the accuracy-vs-blur curve (linear interpolation)', () => {
  const curve = [
    { blurPx: 0, accuracy: 0.95 },
    { blurPx: 2, accuracy: 0.93 },
    { blurPx: 4, accuracy: 0.85 },
    { blurPx: 8, accuracy: 0.6 },
  ];
  it('the crossing of 0.9 lies between 2 and 4 px: 2 + (0.9−0.93)/(0.85−0.93)·2 = 2.75 px', () => {
    expect(toleratedBlurPx({ accuracyVsBlur: curve }, 0.9).blurPx).toBeCloseTo(2.75, 10);
  });
  it('when the last point still meets the accuracy, the last blur (8 px) is the tolerance; no extrapolation', () => {
    expect(toleratedBlurPx({ accuracyVsBlur: curve }, 0.5).blurPx).toBe(8);
  });
  it('when no point meets the accuracy the tolerance is 0 px', () => {
    expect(toleratedBlurPx({ accuracyVsBlur: curve }, 0.97).blurPx).toBe(0);
  });
  it('a curve that dips and recovers gives the largest blur that still meets it: 4 + (0.85−0.92)/(0.7−0.92)·2 = 4.636 px', () => {
    const bumpy = [
      { blurPx: 0, accuracy: 0.9 },
      { blurPx: 2, accuracy: 0.8 },
      { blurPx: 4, accuracy: 0.92 },
      { blurPx: 6, accuracy: 0.7 },
    ];
    expect(toleratedBlurPx({ accuracyVsBlur: bumpy }, 0.85).blurPx).toBeCloseTo(4.63636, 4);
  });
  it('a model that never reaches the accuracy tolerates 0 px, and the blur check blames the model', () => {
    const c = checkOf(validate(fixture({ model: { accuracyVsBlur: curve }, task: { minAccuracy: 0.97 } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.path).toBe('modelId');
    expect(c.message).toContain('never reaches 0.97');
  });
  it('without a curve the tolerance is 2 px of the network input (common practice: one to two pixel pitches)', () => {
    expect(toleratedBlurPx({}, 0.9)).toMatchObject({ blurPx: 2, unit: 'input-px' });
  });
  it('a curve without blurUnit is read in sensor px, and the basis says so', () => {
    const t = toleratedBlurPx({ accuracyVsBlur: curve }, 0.9);
    expect(t.unit).toBe('sensor-px');
    expect(t.basis).toContain('does not declare blurUnit');
    expect(toleratedBlurPx({ accuracyVsBlur: curve, blurUnit: 'input-px' }, 0.9).unit).toBe('input-px');
  });
  it('the validator uses it as the blur limit and as the circle of confusion (2.75 px × 5 µm = 0.01375 mm)', () => {
    const report = validate(fixture({ model: { accuracyVsBlur: curve } }));
    expect(checkOf(report, 'blur-over-range').limit).toBeCloseTo(2.75, 10);
    expect(report.figures.toleratedBlurPx).toBeCloseTo(2.75, 10);
    expect(report.figures.cocMm).toBeCloseTo(0.01375, 10);
    // H = f²/(N·c) + f = 100/(4·0.01375) + 10 = 1,828.18 mm (Greenleaf 1950).
    expect(report.figures.hyperfocalM).toBeCloseTo(1.82818, 4);
  });
});

describe('distances sampled over the working range', () => {
  it(`${BLUR_SAMPLES} distances from near to far, both ends exact, plus the focus distance inside the range`, () => {
    const d = sampleDistancesM(0.5, 4, 0.9);
    expect(d).toHaveLength(BLUR_SAMPLES + 1);
    expect(d[0]).toBe(0.5);
    expect(d[d.length - 1]).toBe(4);
    expect(d).toContain(0.9);
    expect([...d].sort((a, b) => a - b)).toEqual(d);
  });
});

describe('pixels-on-feature (pixel footprint d·p/f, pinhole approximation, REFERENCES.md)', () => {
  // At 1.1 m: 1100 mm · 0.005 mm / 10 mm = 0.55 mm per pixel; a 10 mm feature spans 18.18 sensor px;
  // the 250 px wide network input sees ×250/1000 = 4.545 px.
  it('counts the pixels in the network input after downscaling, and says so', () => {
    const c = checkOf(validate(fixture()), 'pixels-on-feature');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(4.5454, 3);
    expect(c.message).toContain('18.2 sensor px');
    expect(c.message).toContain('downscaling 1000 → 250 px wide');
  });
  it('fails when the downscaled count falls short, and blames the model when the sensor alone would do', () => {
    const c = checkOf(validate(fixture({ task: { pixelsPerFeatureMin: 6 } })), 'pixels-on-feature');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('falls short of the task minimum of 6.00 px by 1.45 px');
    expect(c.path).toBe('modelId');
  });
  it('without downscaling the sensor pixels count in full', () => {
    const c = checkOf(validate(fixture({ model: { inputWidthPx: 1000 } })), 'pixels-on-feature');
    expect(c.actual).toBeCloseTo(18.1818, 3);
  });
});

describe('motion-blur (v·t·f/(d·p) at the near end, REFERENCES.md)', () => {
  // 1 m/s · 1 ms = 1 mm of travel; × 10 mm / 900 mm / 0.005 mm = 2.222 px.
  it('2.22 px at 0.9 m is within a task limit of 3 px', () => {
    const c = checkOf(validate(fixture({ task: { maxRelativeSpeedMPerS: 1, maxMotionBlurPx: 3 } })), 'motion-blur');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(2.2222, 3);
    expect(c.limit).toBe(3);
  });
  it('without a task limit the default tolerance of 2 input px is 8 sensor px after the ×4 downscale, and 2.22 px passes', () => {
    const c = checkOf(validate(fixture({ task: { maxRelativeSpeedMPerS: 1 } })), 'motion-blur');
    expect(c.status).toBe('pass');
    expect(c.limit).toBe(8);
    expect(c.figures?.inputPx).toBeCloseTo(2.2222 / 4, 3);
  });
  it('with a full-width network the tolerance is 2 sensor px and 2.22 px fails', () => {
    const c = checkOf(validate(fixture({ task: { maxRelativeSpeedMPerS: 1 }, model: { inputWidthPx: 1000 } })), 'motion-blur');
    expect(c.status).toBe('fail');
    expect(c.limit).toBe(2);
    expect(c.path).toBe('camera.exposureUs');
    expect(c.message).toContain('exceeds the 2.00 px the model tolerates by 0.222 px');
  });
});
