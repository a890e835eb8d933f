import { describe, expect, it } from 'vitest';
import { chainBlurDiameterUm, diffractionCutoffCycPerMm } from '../../src/physics/index.js';
import { formatReport, validate } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

const blurCurve = [
  { blurPx: 0, accuracy: 0.95 },
  { blurPx: 2, accuracy: 0.93 },
  { blurPx: 4, accuracy: 0.85 },
  { blurPx: 8, accuracy: 0.6 },
];
const snrCurve = [
  { snrDb: 10, accuracy: 0.5 },
  { snrDb: 20, accuracy: 0.9 },
  { snrDb: 30, accuracy: 0.95 },
];

describe('accuracy (model curves, linear interpolation)', () => {
  it('reads the curve at the worst combined blur, in sensor px when the model declares no unit (linear interpolation 0.95 − 0.01·b)', () => {
    const report = validate(fixture({ model: { accuracyVsBlur: blurCurve } }));
    const c = checkOf(report, 'accuracy');
    const b = report.figures.worstBlur.totalPx;
    expect(b).toBeGreaterThan(1.3);
    expect(b).toBeLessThan(1.6);
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(0.95 - 0.01 * b, 9);
    expect(c.message).toContain('curve read as sensor px since the model declares no blurUnit');
    expect(c.figures?.combinedSensorPx).toBeCloseTo(b, 12);
    expect(c.figures?.combinedInputPx).toBeCloseTo(b / 4, 12);
  });
  it('with blurUnit "input-px" the same curve is read at the blur after the ×4 downscale', () => {
    const report = validate(fixture({ model: { accuracyVsBlur: blurCurve, blurUnit: 'input-px' } }));
    const c = checkOf(report, 'accuracy');
    expect(c.actual).toBeCloseTo(0.95 - (0.01 * report.figures.worstBlur.totalPx) / 4, 9);
    expect(c.message).not.toContain('declares no blurUnit');
  });
  it('a blur beyond the measured curve fails: the curve says nothing there', () => {
    const short = [{ blurPx: 0, accuracy: 0.95 }, { blurPx: 1, accuracy: 0.94 }];
    const c = checkOf(validate(fixture({ model: { accuracyVsBlur: short } })), 'accuracy');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('beyond the measured curve');
  });
  it('per-task curves replace the model\'s own for that task only', () => {
    const model = { accuracyVsBlur: blurCurve, measuredForTaskIds: ['test-task', 'other'], taskCurves: [{ taskId: 'test-task', accuracyVsBlur: [{ blurPx: 0, accuracy: 0.99 }, { blurPx: 10, accuracy: 0.99 }] }] };
    const c = checkOf(validate(fixture({ model })), 'accuracy');
    expect(c.actual).toBeCloseTo(0.99, 12);
    expect(c.message).toContain('its curves for task test-task');
  });
  it('with an SNR curve the lower of the two wins: 0.9 + 0.05·0.24006 = 0.91200 at the dark corner\'s 22.40 dB', () => {
    const report = validate(fixture({ model: { accuracyVsBlur: blurCurve, accuracyVsSnr: snrCurve } }));
    const c = checkOf(report, 'accuracy');
    expect(c.actual).toBeCloseTo(0.912003, 5);
    expect(c.path).toBe('camera.exposureUs');
    expect(report.figures.predictedAccuracy).toBeCloseTo(0.912003, 5);
  });
  it('fails a 0.92 minimum by 0.008', () => {
    const c = checkOf(validate(fixture({ task: { minAccuracy: 0.92 }, model: { accuracyVsBlur: blurCurve, accuracyVsSnr: snrCurve } })), 'accuracy');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('falls short of the task minimum of 0.92 by 0.008');
  });
  it('without curves it warns that accuracy is not predicted', () => {
    const report = validate(fixture());
    const c = checkOf(report, 'accuracy');
    expect(c.status).toBe('warn');
    expect(c.message).toContain('no curve: accuracy not predicted');
    expect(report.figures.predictedAccuracy).toBeNull();
    expect(report.status).toBe('warn');
  });
});

describe('model and profile consistency', () => {
  it('a model built for another network fails at modelId', () => {
    const c = checkOf(validate(fixture({ model: { networkId: 'other-net' } })), 'model-network');
    expect(c.status).toBe('fail');
    expect(c.message).toContain("names network 'other-net' but the network given is 'tiny-net'");
    expect(c.path).toBe('modelId');
  });
  it('an fp16 model on an int8 accelerator fails', () => {
    const c = checkOf(validate(fixture({ model: { precision: 'fp16' } })), 'model-precision');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('is fp16 but the accelerator of bench-rig runs int8');
  });
  it('matching network and precision pass', () => {
    const report = validate(fixture());
    expect(checkOf(report, 'model-network').status).toBe('pass');
    expect(checkOf(report, 'model-precision').status).toBe('pass');
  });
});

describe('physical limits become failing checks', () => {
  it('f/1.4 on a lens whose widest stop is f/2 fails at camera.fNumber', () => {
    const report = validate(fixture({ profile: { camera: { fNumber: 1.4 } } }));
    const c = checkOf(report, 'physical-limit');
    expect(c.status).toBe('fail');
    expect(c.path).toBe('camera.fNumber');
    expect(c.message).toContain('wider than the lens');
  });
  it('gain above the sensor maximum fails at camera.analogGain', () => {
    const report = validate(fixture({ profile: { camera: { analogGain: 32 } } }));
    expect(report.checks.filter((c) => c.code === 'physical-limit').map((c) => c.path)).toEqual(['camera.analogGain']);
  });
});

describe('the report', () => {
  it('never throws: a network that cannot be costed becomes a failing check naming the layer', () => {
    const report = validate(
      fixture({ network: { layers: [{ id: 'a', op: 'conv', out: 4, kernel: 3 }, { id: 'b', op: 'conv', out: 3, kernel: 3, groups: 2 }] } }),
    );
    const c = checkOf(report, 'network-cost');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('layer "b"');
    expect(report.figures.latency).toBeNull();
  });
  it('carries the figures the console plots, each number with a unit in its name', () => {
    const report = validate(fixture({ model: { accuracyVsBlur: blurCurve } }));
    const f = report.figures;
    expect(f.blurCurve.length).toBeGreaterThanOrEqual(64);
    expect(f.blurCurve[0]).toMatchObject({ distanceM: 0.9 });
    expect(f.blurCurve.map((p) => p.distanceM)).toContain(1);
    // Working f-number 4·(1 + 10/990) at 1 m focus (N_w = N(1 + m)); the diffraction part alone is the disc with
    // its MTF50 at 0.404·ν_c (Goodman eq. 6-32).
    expect(f.workingFNumber).toBeCloseTo(4 * (1 + 10 / 990), 12);
    expect(f.blurCurve[0]!.diffractionPx).toBeGreaterThan(0.75);
    expect(f.blurCurve[0]!.diffractionPx).toBeLessThan(0.8);
    // At 0.9 m the defocus disc is (100/900)·100/(4·990) mm = 2.806 µm = 0.5612 px (thin lens).
    expect(f.blurCurve[0]!.defocusPx).toBeCloseTo(0.5612, 4);
    const cutoff = diffractionCutoffCycPerMm(550, f.workingFNumber);
    for (const p of f.blurCurve) {
      expect(p.totalPx).toBeCloseTo(chainBlurDiameterUm({ cutoffCycPerMm: cutoff, defocusBlurUm: p.defocusPx * 5, pixelApertureUm: 5, motionUm: 0 }) / 5, 9);
      expect(p.totalPx).toBeGreaterThanOrEqual(Math.max(p.defocusPx * 0.95, p.diffractionPx, p.pixelPx));
      expect(p.totalInputPx).toBeCloseTo(p.totalPx / 4, 12);
    }
    expect(f.mtfAtWorst.length).toBeGreaterThan(10);
    expect(f.mtfAtWorst[0]!.system).toBe(1);
    expect(f.toleratedBlurUnit).toBe('sensor-px');
    expect(f.latency?.totalMs).toBeCloseTo(17.472, 6);
    expect(f.energy?.totalMj).toBeCloseTo(0.021472, 9);
    expect(f.averagePowerW).toBeCloseTo(0.00064416, 10);
    expect(f.snrDarkDb).toBeCloseTo(22.40, 2);
    expect(f.hyperfocalM).toBeGreaterThan(1);
    expect(f.dofNearM).toBeLessThan(1);
    expect(f.dofFarM).toBeGreaterThan(1);
    expect(f.inference).toMatchObject({ macs: 9472, params: 2668, dramBytes: 192, weightsResident: true });
    expect(JSON.parse(JSON.stringify(report)).figures.blurCurve).toHaveLength(f.blurCurve.length);
  });
  it('every check carries a code, status, unit field, path and message', () => {
    for (const c of validate(fixture()).checks) {
      expect(c.code).toMatch(/^[a-z-]+$/);
      expect(['pass', 'warn', 'fail']).toContain(c.status);
      expect(typeof c.unit).toBe('string');
      expect(c.path.length).toBeGreaterThan(0);
      expect(c.message.length).toBeGreaterThan(10);
    }
  });
  it('formats as one line per check with status, code, message and path', () => {
    const text = formatReport(
      {
        status: 'fail',
        checks: [
          { code: 'motion-blur', status: 'fail', actual: 3, limit: 2, unit: 'px', path: 'camera.exposureUs', message: 'motion blur 3.00 px exceeds 2.00 px by 1.00 px' },
          { code: 'latency', status: 'pass', actual: 10, limit: 20, unit: 'ms', path: 'modelId', message: 'latency 10.0 ms is within 20.0 ms' },
        ],
      },
      'p1',
    );
    expect(text).toMatchInlineSnapshot(`
      "p1: FAILS (1 ok, 0 warnings, 1 failures)
        FAIL  motion-blur          motion blur 3.00 px exceeds 2.00 px by 1.00 px  [camera.exposureUs]
        ok    latency              latency 10.0 ms is within 20.0 ms  [modelId]
      "
    `);
  });
});
