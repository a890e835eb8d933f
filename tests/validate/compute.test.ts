import { describe, expect, it } from 'vitest';
import { MIN_CALIBRATION_SAMPLES, validate } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

// The fixture's network: 9,472 MACs on 1 MAC unit at 1 MHz → 9.472 ms, compute-bound (roofline, Williams et al. 2009:
// the only DRAM traffic is the 192-byte input frame at 1 GB/s). Frame: exposure 1 + readout 5 + ISP 2 + inference
// 9.472 = 17.472 ms. Energy: readout 10 pJ × 800,000 px = 0.008 mJ; ISP 5 pJ × 800,000 = 0.004 mJ;
// inference 9,472 MACs × 1,000 pJ = 0.009472 mJ; total 0.021472 mJ; at 30 Hz 0.64416 mW.
describe('latency (exposure + readout + ISP + inference, sequential)', () => {
  it('17.472 ms is within a 20 ms budget', () => {
    const report = validate(fixture());
    const c = checkOf(report, 'latency');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(17.472, 6);
    expect(c.unit).toBe('ms');
    expect(report.figures.latency).toMatchObject({ exposureMs: 1, readoutMs: 5, ispMs: 2 });
    expect(report.figures.latency!.inferenceMs).toBeCloseTo(9.472, 6);
  });
  it('fails a 15 ms budget by 2.47 ms and blames the largest stage (inference; weights resident → the model)', () => {
    const c = checkOf(validate(fixture({ task: { latencyBudgetMs: 15 } })), 'latency');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('exceeds the latency budget of 15.0 ms by 2.47 ms');
    expect(c.path).toBe('modelId');
  });
});

describe('energy-per-frame and average-power', () => {
  it('0.021472 mJ per frame is within 0.03 mJ', () => {
    const report = validate(fixture());
    const c = checkOf(report, 'energy-per-frame');
    expect(c.status).toBe('pass');
    expect(c.actual).toBeCloseTo(0.021472, 9);
    expect(report.figures.energy).toMatchObject({ readoutMj: 0.008, ispMj: 0.004 });
  });
  it('fails a 0.02 mJ budget', () => {
    expect(checkOf(validate(fixture({ task: { energyBudgetMjPerFrame: 0.02 } })), 'energy-per-frame').status).toBe('fail');
  });
  it('0.021472 mJ × 30 Hz = 0.00064416 W passes a 1 mW budget and fails 0.5 mW, named as the vision share', () => {
    const pass = checkOf(validate(fixture({ deviceClass: { platform: { powerBudgetW: 0.001 } } })), 'average-power');
    expect(pass.status).toBe('pass');
    expect(pass.actual).toBeCloseTo(0.00064416, 10);
    expect(pass.message).toContain("vision pipeline's share");
    const fail = checkOf(validate(fixture({ deviceClass: { platform: { powerBudgetW: 0.0005 } } })), 'average-power');
    expect(fail.status).toBe('fail');
  });
});

describe('calibration scales inference latency and energy', () => {
  it(`with ${MIN_CALIBRATION_SAMPLES}+ samples, ×2 latency makes inference 18.944 ms and the frame 26.944 ms`, () => {
    const report = validate(fixture(), { calibration: { latencyFactor: 2, energyFactor: 3, samples: 12 } });
    const latency = checkOf(report, 'latency');
    expect(latency.actual).toBeCloseTo(26.944, 6);
    expect(latency.status).toBe('fail');
    expect(latency.message).toContain('scaled by calibration ×2.00 latency, ×3.00 energy (12 samples)');
    expect(checkOf(report, 'energy-per-frame').actual).toBeCloseTo(0.008 + 0.004 + 3 * 0.009472, 9);
  });
  it('with too few samples it is not applied, and the message says so', () => {
    const latency = checkOf(validate(fixture(), { calibration: { latencyFactor: 2, energyFactor: 2, samples: 2 } }), 'latency');
    expect(latency.actual).toBeCloseTo(17.472, 6);
    expect(latency.message).toContain('calibration not applied: 2 samples');
  });
});

describe('memory-fits-sram', () => {
  it('16 + 16 KiB fit 64 KiB; the 2,668 int8 weight bytes stay resident', () => {
    const report = validate(fixture());
    const c = checkOf(report, 'memory-fits-sram');
    expect(c.status).toBe('pass');
    expect(c.actual).toBe(32);
    expect(c.limit).toBe(64);
    expect(c.message).toContain('stay resident');
    // conv 3·3·3·4 = 108 weights, fc 256·10 = 2,560 weights: 2,668 parameters (Howard et al. 2017 counting).
    expect(report.figures.inference).toMatchObject({ macs: 9472, params: 2668, weightsResident: true });
  });
  it('48 + 32 KiB exceed 64 KiB: the check fails and the physical limit is reported at `memory`', () => {
    const report = validate(fixture({ profile: { memory: { weightBufferKib: 48, activationBufferKib: 32 } } }));
    expect(checkOf(report, 'memory-fits-sram').status).toBe('fail');
    expect(checkOf(report, 'memory-fits-sram').message).toContain('by 16.0 KiB');
    expect(report.checks.find((c) => c.code === 'physical-limit')?.path).toBe('memory');
    expect(report.status).toBe('fail');
  });
  it('a weight buffer too small for the weights is noted as streaming from DRAM', () => {
    const c = checkOf(validate(fixture({ profile: { memory: { weightBufferKib: 1 } } })), 'memory-fits-sram');
    expect(c.message).toContain('streams from DRAM every frame');
  });
});
