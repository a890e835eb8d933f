import { describe, expect, it } from 'vitest';
import { BLUR_SAMPLES, sampleDistancesM, toleratedBlurPx, validate } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

// Hand-worked numbers for the fixture (f = 10 mm, N = 4, p = 5 µm, λ = 550 nm):
//  blur circle b = (|d − s|/d)·f²/(N(s − f)) (REFERENCES.md, thin lens);
//  Airy diameter 2.44·λ·N = 5.368 µm = 1.0736 px (Born & Wolf §8.5.2);
//  total = √(b² + airy²)/p (root-sum-square, common practice).
describe('blur-over-range (thin-lens blur circle + Airy disk in quadrature)', () => {
  it('focused at 1 m over 0.9–1.1 m the worst total blur is 1.211 px at 0.9 m, within the default 2 px', () => {
    // b(0.9 m) = (100/900)·100/(4·990) mm = 2.806 µm; √(2.806² + 5.368²)/5 = 1.2114 px.
    const c = checkOf(validate(fixture()), 'blur-over-range');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(1.2114, 3);
    expect(c.limit).toBe(2);
    expect(c.unit).toBe('px');
    expect(c.message).toMatch(/worst blur 1\.21 px at 0\.9 m .* is within the 2\.00 px the model tolerates \(0\.789 px to spare\)/);
  });

  it('over 0.5–2 m the worst blur is 5.163 px at 0.5 m; no focus fixes it at f/4, so it points at the f-number', () => {
    // b(0.5 m) = 1·100/(4·990) mm = 25.25 µm; √(25.25² + 5.368²)/5 = 5.163 px. Best focus 2·0.5·2/2.5 = 0.8 m still gives 3.95 px.
    const c = checkOf(validate(fixture({ task: { nearDistanceM: 0.5, farDistanceM: 2 } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.actual).toBeCloseTo(5.1634, 3);
    expect(c.message).toContain('exceeds the 2.00 px the model tolerates by 3.16 px');
    expect(c.message).toContain('0.8 m');
    expect(c.path).toBe('camera.fNumber');
  });

  it('a misplaced focus that a better focus would fix points at camera.focusDistanceM', () => {
    // Focused at 2 m: b(0.9 m) = (1100/900)·100/(4·1990) mm → 3.253 px; at 0.99 m (harmonic mean) 1.189 px.
    const c = checkOf(validate(fixture({ profile: { camera: { focusDistanceM: 2 } } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.actual).toBeCloseTo(3.2532, 3);
    expect(c.path).toBe('camera.focusDistanceM');
    expect(c.message).toContain('Focusing at 0.99 m would bring the worst blur to 1.19 px');
  });

  it('when diffraction alone exceeds the tolerance it says so (Airy 2.44·λ·N at f/16 = 21.5 µm = 4.29 px)', () => {
    const c = checkOf(validate(fixture({ profile: { camera: { fNumber: 16 } } })), 'blur-over-range');
    expect(c.status).toBe('fail');
    expect(c.path).toBe('camera.fNumber');
    expect(c.message).toContain('Diffraction alone');
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
  it('without a curve the tolerance is 2 px (common practice: one to two pixel pitches, REFERENCES.md)', () => {
    expect(toleratedBlurPx({}, 0.9).blurPx).toBe(2);
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
  it('without a task limit the model tolerance (2 px) applies and 2.22 px fails', () => {
    const c = checkOf(validate(fixture({ task: { maxRelativeSpeedMPerS: 1 } })), 'motion-blur');
    expect(c.status).toBe('fail');
    expect(c.limit).toBe(2);
    expect(c.path).toBe('camera.exposureUs');
    expect(c.message).toContain('exceeds the 2.00 px the model tolerates by 0.222 px');
  });
});
