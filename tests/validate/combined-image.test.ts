import fc from 'fast-check';
import { fileURLToPath } from 'node:url';
import { beforeAll, describe, expect, it } from 'vitest';
import { findDocument, loadCatalog, profilesOf, resolveProfile } from '../../src/document-files/index.js';
import type { Catalog } from '../../src/document-files/index.js';
import { plan } from '../../src/plan/index.js';
import type { ValidationInput } from '../../src/validate/index.js';
import { validate } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

const DEMO = fileURLToPath(new URL('../../profiles/greenhouse-demo', import.meta.url));
let catalog: Catalog;
beforeAll(async () => {
  catalog = await loadCatalog([DEMO]);
});

function demoInput(profileId: string): ValidationInput {
  const found = profilesOf(catalog).find((p) => p.profile.id === profileId)!;
  const resolved = resolveProfile(catalog, found.profile, found.file);
  if (!resolved.ok) throw new Error(resolved.issues.map((i) => i.message).join('; '));
  return resolved.value;
}

describe('regressions: the image the network receives (demo data)', () => {
  it('fruit-counting-a passes as shipped, and at 6000 µs exposure its motion blur of about 12 px now fails accuracy too', () => {
    const shipped = demoInput('fruit-counting-a');
    expect(validate(shipped).status).toBe('pass');
    const slow = { ...shipped, profile: { ...shipped.profile, camera: { ...shipped.profile.camera, exposureUs: 6000 } } };
    const report = validate(slow);
    const motion = checkOf(report, 'motion-blur');
    // v·t·f/(d·p) = 0.3 m/s · 6 ms · 6 mm / (0.3 m · 3 µm) = 12 px (pinhole camera), plus one 11 µs line of the rolling shutter.
    expect(motion.status).toBe('fail');
    expect(motion.actual).toBeGreaterThan(12);
    expect(motion.actual).toBeLessThan(12.1);
    const accuracy = checkOf(report, 'accuracy');
    expect(accuracy.status).toBe('fail');
    expect(checkOf(report, 'blur-over-range').status).toBe('fail');
    // The combined blur is larger than the motion smear alone: motion and defocus blur the same image.
    expect(report.figures.worstBlur.totalPx).toBeGreaterThan(motion.actual!);
  });

  it('turning makes low-light-patrol fail: 30 °/s smears the old 10 ms exposure by about 10 px whatever the distance (f·ω·t/p)', () => {
    const shipped = demoInput('low-light-patrol-a');
    expect(validate(shipped).status).toBe('pass');
    const old = { ...shipped, profile: { ...shipped.profile, camera: { ...shipped.profile.camera, exposureUs: 10_000, analogGain: 2 } } };
    const still = { ...old, task: { ...old.task, maxYawRateDegPerS: 0 } };
    const turning = { ...old, task: { ...old.task, maxYawRateDegPerS: 30 } };
    expect(checkOf(validate(still), 'motion-blur').status).toBe('fail'); // 0.3 m/s for 10 ms at 1 m is 6 px + a line: just over the 6 px limit
    const stillMotion = checkOf(validate(still), 'motion-blur').actual!;
    const turningReport = validate(turning);
    const turnMotion = checkOf(turningReport, 'motion-blur');
    // 6 mm · tan(0.3°) / 3 µm = 10.47 px added sideways.
    expect(turnMotion.actual! - stillMotion).toBeCloseTo((6 * Math.tan((0.3 * Math.PI) / 180)) / 0.003, 1);
    expect(turnMotion.status).toBe('fail');
    expect(turningReport.status).toBe('fail');
    expect(turningReport.figures.worstBlur.totalPx).toBeGreaterThan(validate(still).figures.worstBlur.totalPx + 9);
  });

  it("the planner's fruit-counting fronts hold only fruit models, and say why the others were skipped", () => {
    const task = findDocument(catalog, 'task', 'fruit-counting')!;
    const candidates = catalog.documents.flatMap((d) => (d.kind === 'model' ? [{ model: d.value, network: findDocument(catalog, 'network', d.value.networkId)! }] : []));
    for (const dcId of ['gh-scout-a', 'gh-scout-b']) {
      const result = plan({ task, deviceClass: findDocument(catalog, 'device-class', dcId)!, candidates });
      expect(result.front.length).toBeGreaterThan(0);
      for (const c of result.front) expect(c.modelId).toMatch(/^fruit-finder-/);
      expect(result.skipped.find((s) => s.modelId.startsWith('row-guide'))?.reason).toContain('not for task fruit-counting');
    }
  });

  it('every shipped demo profile pairs a model with a task it was measured for', () => {
    for (const { profile } of profilesOf(catalog)) {
      expect(checkOf(validate(demoInput(profile.id)), 'model-task').status, profile.id).toBe('pass');
    }
  });
});

describe('the MTF at the feature', () => {
  it("a 10 mm feature at 1.1 m is 0.0909 mm on the sensor (f/d, pinhole), read at 1/(2·0.0909 mm) = 5.5 cycles/mm; the contrast left is featureContrast × MTF", () => {
    const report = validate(fixture({ task: { featureContrast: 0.4 } }));
    const f = report.figures;
    expect(f.featureCycPerMm).toBeCloseTo(1 / (2 * ((10 * 10) / 1100)), 9);
    expect(f.mtfAtFeature).toBeGreaterThan(0.9);
    expect(f.mtfAtFeature).toBeLessThanOrEqual(1);
    expect(f.featureImageContrast).toBeCloseTo(0.4 * f.mtfAtFeature, 12);
    expect(f.mtf50CycPerMm).toBeGreaterThan(f.featureCycPerMm);
    expect(validate(fixture()).figures.featureImageContrast).toBeNull();
  });
});

describe('model-task', () => {
  it('fails a model measured for other tasks, pointing at modelId', () => {
    const c = checkOf(validate(fixture({ model: { measuredForTaskIds: ['row-navigation'] } })), 'model-task');
    expect(c.status).toBe('fail');
    expect(c.path).toBe('modelId');
    expect(c.message).toContain('not for task test-task');
  });
  it('passes a model measured for the task, and warns when the model does not say', () => {
    expect(checkOf(validate(fixture({ model: { measuredForTaskIds: ['test-task'] } })), 'model-task').status).toBe('pass');
    expect(checkOf(validate(fixture()), 'model-task').status).toBe('warn');
  });
});

describe('rolling-shutter-skew', () => {
  it('a global shutter has none', () => {
    const c = checkOf(validate(fixture({ task: { maxRelativeSpeedMPerS: 1 } })), 'rolling-shutter-skew');
    expect(c).toMatchObject({ status: 'pass', actual: 0 });
  });
  it('a rolling shutter read out over 5 ms at 1 m/s shears the image by v·T·f/(d·p) = 11.1 px at 0.9 m, reported apart from blur', () => {
    // Line time 5 ms / 800 rows = 6.25 µs; 799 lines = 4.994 ms; 1 m/s · 4.994 ms · 10 mm / (900 mm · 5 µm) = 11.10 px.
    const report = validate(fixture({ task: { maxRelativeSpeedMPerS: 1 }, deviceClass: { sensor: { shutter: 'rolling' } } }));
    const c = checkOf(report, 'rolling-shutter-skew');
    expect(c.actual).toBeCloseTo((1 * 4.99375 * 10) / (900 * 0.005), 6);
    // The feature is 10 mm / (900 · 0.005/10 mm) = 22.2 px at the near end: the default limit.
    expect(c.limit).toBeCloseTo(22.222, 3);
    expect(c.status).toBe('pass');
  });
  it('warns above the task limit, with the line time given', () => {
    const report = validate(fixture({ task: { maxRelativeSpeedMPerS: 1, maxRollingSkewPx: 5 }, deviceClass: { sensor: { shutter: 'rolling', lineTimeUs: 10 } } }));
    const c = checkOf(report, 'rolling-shutter-skew');
    expect(c.status).toBe('warn');
    expect(c.limit).toBe(5);
    expect(c.actual).toBeCloseTo((7.99 * 10) / 4.5, 6);
  });
});

describe('properties of the combined checks (fast-check)', () => {
  it('the accuracy check never passes a profile whose motion-blur check fails by more than the tolerance', () => {
    const curve = [
      { blurPx: 0, accuracy: 0.95 },
      { blurPx: 1, accuracy: 0.93 },
      { blurPx: 3, accuracy: 0.85 },
      { blurPx: 6, accuracy: 0.6 },
    ];
    fc.assert(
      fc.property(
        fc.double({ min: 0, max: 3, noNaN: true }),
        fc.double({ min: 100, max: 30_000, noNaN: true }),
        fc.double({ min: 0, max: 60, noNaN: true }),
        fc.constantFrom<'sensor-px' | 'input-px' | undefined>('sensor-px', 'input-px', undefined),
        fc.constantFrom(250, 1000),
        (speed, exposureUs, yaw, blurUnit, inputWidthPx) => {
          const model = { accuracyVsBlur: curve, inputWidthPx, ...(blurUnit ? { blurUnit } : {}) };
          const report = validate(fixture({ task: { maxRelativeSpeedMPerS: speed, maxYawRateDegPerS: yaw, frameRateHz: 1 }, profile: { camera: { exposureUs } }, model }));
          const motion = checkOf(report, 'motion-blur');
          const tolerance = report.figures.toleratedBlurPx * (report.figures.toleratedBlurUnit === 'input-px' ? report.figures.downscale : 1);
          if (motion.status === 'fail' && motion.actual! - motion.limit! > tolerance) {
            expect(checkOf(report, 'accuracy').status).not.toBe('pass');
          }
        },
      ),
    );
  });
});
