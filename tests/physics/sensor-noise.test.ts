import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { acceleratorIdlePowerMw, darkCurrentAtEPerS, frameBudget, quantisationVarianceE2, readNoiseAtGainE, saturationElectrons, snrDbWithNoise, snrWithNoise } from '../../src/physics/index.js';

const table = [
  { analogGain: 1, readNoiseE: 2.4 },
  { analogGain: 2, readNoiseE: 1.8 },
  { analogGain: 4, readNoiseE: 1.4 },
  { analogGain: 16, readNoiseE: 1.1 },
];

describe('EMVA 1288 Release 4.0 noise chain', () => {
  it('read noise per gain: table values at its gains, linear between, ends held; one value without a table', () => {
    expect(readNoiseAtGainE(9, table, 4)).toBe(1.4);
    expect(readNoiseAtGainE(9, table, 3)).toBeCloseTo(1.6, 12);
    expect(readNoiseAtGainE(9, table, 32)).toBe(1.1);
    expect(readNoiseAtGainE(9, undefined, 32)).toBe(9);
  });
  it('quantisation σq² = 1/12 DN² referred to electrons by K²: 12-bit at K = 1 DN/e⁻ gives 1/12 e⁻²', () => {
    expect(quantisationVarianceE2(12, undefined, 1)).toBeCloseTo(1 / 12, 15);
  });
  it('handing 8 of 12 bits to the network adds steps of 16 DN: (1 + 16²)/12 DN²', () => {
    expect(quantisationVarianceE2(12, 8, 1)).toBeCloseTo(257 / 12, 12);
    expect(quantisationVarianceE2(12, 12, 1)).toBeCloseTo(1 / 12, 15);
  });
  it('SNR = μe/√(σr² + μd + σq²/K² + μe): 100 e⁻ at gain 4 (K = 1.56 DN/e⁻, σr 1.4 e⁻, 8 of 12 bits) gives 9.502, 19.56 dB (hand-worked)', () => {
    const noise = { readNoiseE: readNoiseAtGainE(0, table, 4), darkElectrons: 0, quantisationVarE2: quantisationVarianceE2(12, 8, 0.39 * 4) };
    expect(snrWithNoise(100, noise)).toBeCloseTo(9.50184, 4);
    expect(snrDbWithNoise(100, noise)).toBeCloseTo(19.5562, 3);
  });
  it('the same 100 e⁻ at gain 1 (σr 2.4 e⁻, K = 0.39) gives only 16.08 dB: gain lowers read and quantisation noise (hand-worked)', () => {
    const noise = { readNoiseE: readNoiseAtGainE(0, table, 1), darkElectrons: 0, quantisationVarE2: quantisationVarianceE2(12, 8, 0.39) };
    expect(snrDbWithNoise(100, noise)).toBeCloseTo(16.0807, 3);
  });
  it('dark electrons add their shot noise: with σr = 0, σq = 0 and μd = μe the SNR is √(μe/2)', () => {
    expect(snrWithNoise(200, { readNoiseE: 0, darkElectrons: 200, quantisationVarE2: 0 })).toBeCloseTo(10, 12);
  });
  it('dark current doubles every doubling temperature: 10 e⁻/s at 25 °C with 7 °C doubling is 40 e⁻/s at 39 °C and 5 e⁻/s at 18 °C (common practice: 6–8 °C)', () => {
    expect(darkCurrentAtEPerS(10, 25, 7, 39)).toBeCloseTo(40, 12);
    expect(darkCurrentAtEPerS(10, 25, 7, 18)).toBeCloseTo(5, 12);
  });
  it('property: more gain never increases the full-scale electrons min(full well, (2^bits − 1)/K)', () => {
    fc.assert(
      fc.property(fc.double({ min: 100, max: 1e6, noNaN: true }), fc.integer({ min: 8, max: 16 }), fc.double({ min: 0.01, max: 10, noNaN: true }), fc.double({ min: 1, max: 64, noNaN: true }), fc.double({ min: 1, max: 64, noNaN: true }), (well, bits, k, g1, g2) => {
        const [lo, hi] = g1 < g2 ? [g1, g2] : [g2, g1];
        expect(saturationElectrons(well, bits, k, hi)).toBeLessThanOrEqual(saturationElectrons(well, bits, k, lo));
      }),
    );
  });
});

describe('power of the whole frame (E = E_busy + P_idle·(T_frame − t_busy), common practice)', () => {
  const sensor = { widthPx: 1000, heightPx: 1000, readoutMsPerFrame: 10, readoutEnergyPjPerPixel: 100, activePowerMw: 200, idlePowerMw: 50, exposureDuringReadout: false };
  const isp = { latencyMsPerFrame: 5, energyPjPerPixel: 1000, idlePowerMw: 10 };
  it('hand-worked: 10 Hz, 2 ms exposure, 20 ms inference at 3 mJ, accelerator idling at 100 mW, a 2 W strobe', () => {
    const b = frameBudget({ exposureUs: 2000, sensor, isp, inferenceMs: 20, inferenceMj: 3, acceleratorIdleMw: 100, light: { electricalPowerW: 2, syncedToExposure: true, idlePowerMw: 0 }, frameRateHz: 10 });
    // sensor busy 12 ms: 1e6 px × 100 pJ = 0.1 mJ + 200 mW × 12 ms = 2.4 mJ; idle 50 mW × 88 ms = 4.4 mJ.
    expect(b.energy.readoutMj).toBeCloseTo(2.5, 12);
    expect(b.energy.idle.sensorMj).toBeCloseTo(4.4, 12);
    // ISP 1 mJ busy + 10 mW × 95 ms = 0.95 mJ; accelerator 3 mJ + 100 mW × 80 ms = 8 mJ; light 2 W × 2 ms = 4 mJ.
    expect(b.energy.ispMj).toBeCloseTo(1, 12);
    expect(b.energy.idle.ispMj).toBeCloseTo(0.95, 12);
    expect(b.energy.idle.acceleratorMj).toBeCloseTo(8, 12);
    expect(b.energy.lightMj).toBeCloseTo(4, 12);
    expect(b.energy.totalMj).toBeCloseTo(2.5 + 4.4 + 1 + 0.95 + 3 + 8 + 4, 12);
    // Average power = energy per frame / frame period: 23.85 mJ / 100 ms = 0.2385 W.
    expect(b.averagePowerW).toBeCloseTo(0.2385, 12);
  });
  it('throughput: the busiest stage is inference at 20 ms; with exposure during readout the sensor stage is the longer of the two', () => {
    const b = frameBudget({ exposureUs: 30000, sensor, isp, inferenceMs: 20, inferenceMj: 3, frameRateHz: 10 });
    expect(b.throughput).toMatchObject({ busiest: 'sensor', sensorMs: 40, busiestMs: 40, framePeriodMs: 100 });
    const overlapped = frameBudget({ exposureUs: 30000, sensor: { ...sensor, exposureDuringReadout: true }, isp, inferenceMs: 20, inferenceMj: 3, frameRateHz: 10 });
    expect(overlapped.throughput).toMatchObject({ busiest: 'sensor', sensorMs: 30 });
  });
  it('a power-gated accelerator idles at 0; otherwise at its idle power, which defaults to its static power', () => {
    expect(acceleratorIdlePowerMw({ powerGated: true, staticPowerMw: 120 })).toBe(0);
    expect(acceleratorIdlePowerMw({ powerGated: false, staticPowerMw: 120 })).toBe(120);
    expect(acceleratorIdlePowerMw({ powerGated: false, staticPowerMw: 120, idlePowerMw: 30 })).toBe(30);
  });
  it('property: energy per frame with idle power never falls below the gated case', () => {
    fc.assert(
      fc.property(fc.double({ min: 1, max: 120, noNaN: true }), fc.double({ min: 10, max: 100_000, noNaN: true }), fc.double({ min: 0, max: 300, noNaN: true }), fc.double({ min: 0, max: 2000, noNaN: true }), (hz, exposureUs, inferenceMs, staticMw) => {
        const args = { exposureUs, sensor, isp, inferenceMs, inferenceMj: 1, frameRateHz: hz };
        const gated = frameBudget({ ...args, acceleratorIdleMw: acceleratorIdlePowerMw({ powerGated: true, staticPowerMw: staticMw }) });
        const idle = frameBudget({ ...args, acceleratorIdleMw: acceleratorIdlePowerMw({ powerGated: false, staticPowerMw: staticMw }) });
        expect(idle.energy.totalMj).toBeGreaterThanOrEqual(gated.energy.totalMj);
        expect(idle.averagePowerW).toBeGreaterThanOrEqual(gated.averagePowerW);
      }),
    );
  });
});
