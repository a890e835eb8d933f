import { readFileSync } from 'node:fs';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { acceleratorCost, acceleratorTotals, analyzeNetwork, frameBudget, ridgePointMacsPerByte } from '../../src/physics/index.js';
import { acceleratorSchema, ispSchema, networkSchema, sensorSchema, type DeviceClass, type Network } from '../../src/schema/index.js';
import { mobileNetV1 } from '../support/physics-mobilenet.js';

/**
 * A small int8 accelerator for hand-working the roofline (invented figures, sized for round numbers;
 * the energies are Horowitz, ISSCC 2014, 45 nm: 8-bit multiply 0.2 pJ; 32 KB SRAM 20 pJ per 64 bits
 * = 2.5 pJ/byte; DRAM 1.3–2.6 nJ per 64 bits, taken as 200 pJ/byte).
 * Peak compute 100 MAC units × 100 MHz = 1e10 MAC/s = 1e7 MAC/ms; DRAM 1 GB/s = 1e6 bytes/ms.
 * Ridge point = 1e10 / 1e9 = 10 MAC per byte (Williams et al. 2009).
 */
const accel: DeviceClass['accelerator'] = acceleratorSchema.parse({
  macUnits: 100,
  clockMhz: 100,
  precision: 'int8',
  sramKib: 512,
  dramBandwidthGbPerS: 1,
  energyPjPerMac: 0.2,
  energyPjPerSramByte: 2.5,
  energyPjPerDramByte: 200,
  staticPowerMw: 100,
  flashReadMbPerS: 100,
});

/** conv 3×3 16→32 on 16×8×8, then fc 2048→100 with bias. */
const twoLayers: Network = {
  name: 'roofline example',
  input: { channels: 16, height: 8, width: 8 },
  layers: [
    { id: 'conv', op: 'conv', out: 32, kernel: 3, stride: 1, groups: 1, bias: false },
    { id: 'fc', op: 'fc', out: 100, bias: true },
  ],
};
const analysis = analyzeNetwork(twoLayers);

describe('roofline (Williams, Waterman, Patterson, CACM 2009), hand-worked', () => {
  it('the example accelerator has its ridge point at 10 MAC/byte', () => {
    expect(ridgePointMacsPerByte(accel)).toBe(10);
  });

  // Weights 4,608 + 204,900 = 209,508 bytes; neither layer's weights fit a 4 KiB (4,096-byte) weight buffer: every layer streams its weights.
  // Activations: conv I+O = 1,024 + 2,048 = 3,072 bytes, fc 2,048 + 100 = 2,148 bytes; both fit 8 KiB.
  const cost = acceleratorCost(analysis, accel, { weightBufferKib: 4, activationBufferKib: 8 });
  const [conv, fcLayer] = cost.layers as [(typeof cost.layers)[0], (typeof cost.layers)[0]];

  it('the conv layer is compute-bound: 294,912 MACs → 0.0294912 ms against 5,632 DRAM bytes (4,608 weights + 1,024 frame) → 0.005632 ms', () => {
    expect(analysis.layers[0]!.macs).toBe(294_912);
    expect(conv.dramBytes).toBe(5_632);
    expect(conv.computeMs).toBeCloseTo(0.0294912, 12);
    expect(conv.memoryMs).toBeCloseTo(0.005632, 12);
    expect(conv.bound).toBe('compute');
    expect(conv.latencyMs).toBe(conv.computeMs);
    // Operational intensity 294,912 / 5,632 = 52 MAC/byte, right of the ridge.
  });

  it('the fc layer is memory-bound: 204,900 weight bytes → 0.2049 ms against 204,800 MACs → 0.02048 ms', () => {
    expect(fcLayer.dramBytes).toBe(204_900);
    expect(fcLayer.memoryMs).toBeCloseTo(0.2049, 12);
    expect(fcLayer.computeMs).toBeCloseTo(0.02048, 12);
    expect(fcLayer.bound).toBe('memory');
    // Operational intensity 204,800 / 204,900 ≈ 1 MAC/byte, left of the ridge.
  });

  it('totals: latency 0.2343912 ms, 210,532 DRAM bytes, one compute-bound layer, weights not resident', () => {
    expect(cost.latencyMs).toBeCloseTo(0.2343912, 12);
    expect(cost.dramBytes).toBe(210_532);
    expect(cost.computeBoundLayers).toBe(1);
    expect(cost.weightsResident).toBe(false);
    expect(cost.weightBytes).toBe(209_508);
    // 209,508 bytes at 100 MB/s of flash = 2.09508 ms.
    expect(cost.weightLoadMs).toBeCloseTo(2.09508, 12);
  });

  it('energy 0.0661822824 mJ: MACs, SRAM and DRAM bytes at Horowitz 2014 figures plus 100 mW static over the latency', () => {
    // conv: 294,912·0.2 + 7,680·2.5 + 5,632·200 = 1,204,582.4 pJ; static 100 mW·0.0294912 ms = 0.00294912 mJ
    // fc:   204,800·0.2 + 207,048·2.5 + 204,900·200 = 41,538,580 pJ; static 100 mW·0.2049 ms = 0.02049 mJ
    expect(conv.energyMj).toBeCloseTo(0.0012045824 + 0.00294912, 14);
    expect(fcLayer.energyMj).toBeCloseTo(0.04153858 + 0.02049, 14);
    expect(cost.energyMj).toBeCloseTo(0.0661822824, 14);
  });

  it('with a 256 KiB weight buffer the weights are resident: only the 1,024-byte frame crosses DRAM and both layers are compute-bound', () => {
    const resident = acceleratorCost(analysis, accel, { weightBufferKib: 256, activationBufferKib: 8 });
    expect(resident.weightsResident).toBe(true);
    expect(resident.dramBytes).toBe(1_024);
    expect(resident.computeBoundLayers).toBe(2);
    expect(resident.latencyMs).toBeCloseTo(0.0294912 + 0.02048, 12);
  });

  it('with a 2 KiB activation buffer both layers spill and read and write their activations through DRAM', () => {
    const spill = acceleratorCost(analysis, accel, { weightBufferKib: 256, activationBufferKib: 2 });
    expect(spill.layers.map((l) => l.dramBytes)).toEqual([3_072, 2_148]);
  });

  it('acceleratorTotals returns the same totals as acceleratorCost', () => {
    const partition = { weightBufferKib: 4, activationBufferKib: 8 };
    const { layers, ...totals } = acceleratorCost(analysis, accel, partition);
    expect(layers).toHaveLength(2);
    expect(acceleratorTotals(analysis, accel, partition)).toEqual(totals);
  });

  it('fp16 doubles every byte count (2 bytes per element)', () => {
    const partition = { weightBufferKib: 0, activationBufferKib: 0 };
    const int8 = acceleratorTotals(analysis, accel, partition);
    const fp16 = acceleratorTotals(analysis, { ...accel, precision: 'fp16' }, partition);
    expect(fp16.dramBytes).toBe(2 * int8.dramBytes);
    expect(fp16.weightBytes).toBe(2 * int8.weightBytes);
  });
});

describe('roofline properties', () => {
  const mobileNet = analyzeNetwork(
    networkSchema.parse(JSON.parse(readFileSync(new URL('../../profiles/greenhouse-demo/networks/mobilenet-v1-1.0-224.json', import.meta.url), 'utf8'))),
  );
  const variants = [mobileNet, analyzeNetwork(mobileNetV1(0.25, 128)), analyzeNetwork(mobileNetV1(0.5, 160))];
  const layerArb = fc.oneof(
    fc.record({ op: fc.constant('conv' as const), out: fc.integer({ min: 1, max: 48 }), kernel: fc.constantFrom(1, 3), stride: fc.constantFrom(1, 2), groups: fc.constant(1), bias: fc.boolean() }),
    fc.record({ op: fc.constant('dwconv' as const), kernel: fc.constantFrom(3, 5), stride: fc.constantFrom(1, 2), bias: fc.constant(false) }),
    fc.record({ op: fc.constant('maxpool' as const), kernel: fc.constant(2), global: fc.constant(false) }),
  );
  const networkArb = fc
    .record({
      channels: fc.integer({ min: 1, max: 16 }),
      size: fc.integer({ min: 1, max: 64 }),
      layers: fc.array(layerArb, { minLength: 1, maxLength: 8 }),
    })
    .map(({ channels, size, layers }) =>
      analyzeNetwork({ name: 'random', input: { channels, height: size, width: size }, layers: [...layers, { op: 'fc', out: 10, bias: true }] }),
    );
  const anyAnalysis = fc.oneof(fc.constantFrom(...variants), networkArb);
  const kib = fc.double({ min: 0, max: 8_192, noNaN: true });

  it('a larger activation buffer never increases DRAM traffic (model in accelerator.ts)', () => {
    fc.assert(
      fc.property(anyAnalysis, kib, kib, kib, fc.constantFrom('int8' as const, 'fp16' as const), (a, weights, act1, act2, precision) => {
        const [small, large] = act1 < act2 ? [act1, act2] : [act2, act1];
        const acc = { ...accel, precision };
        const before = acceleratorTotals(a, acc, { weightBufferKib: weights, activationBufferKib: small });
        const after = acceleratorTotals(a, acc, { weightBufferKib: weights, activationBufferKib: large });
        expect(after.dramBytes).toBeLessThanOrEqual(before.dramBytes);
        expect(after.latencyMs).toBeLessThanOrEqual(before.latencyMs + 1e-12);
      }),
    );
  });

  it('a larger weight buffer never increases DRAM traffic (model in accelerator.ts)', () => {
    fc.assert(
      fc.property(anyAnalysis, kib, kib, kib, (a, act, w1, w2) => {
        const [small, large] = w1 < w2 ? [w1, w2] : [w2, w1];
        const before = acceleratorTotals(a, accel, { weightBufferKib: small, activationBufferKib: act });
        const after = acceleratorTotals(a, accel, { weightBufferKib: large, activationBufferKib: act });
        expect(after.dramBytes).toBeLessThanOrEqual(before.dramBytes);
      }),
    );
  });

  it('MobileNetV1 1.0-224 int8 weights are 4,210,088 bytes (4,111.4 KiB) and take 42.1 ms to load at 100 MB/s', () => {
    const t = acceleratorTotals(mobileNet, accel, { weightBufferKib: 4_111, activationBufferKib: 0 });
    expect(t.weightBytes).toBe(4_210_088);
    expect(t.weightsResident).toBe(false);
    expect(t.weightLoadMs).toBeCloseTo(42.10088, 9);
    expect(acceleratorTotals(mobileNet, accel, { weightBufferKib: 4_112, activationBufferKib: 0 }).weightsResident).toBe(true);
  });
});

describe('frame budget', () => {
  const sensor: DeviceClass['sensor'] = sensorSchema.parse({
    widthPx: 1_920,
    heightPx: 1_080,
    pixelPitchUm: 3,
    quantumEfficiency: 0.6,
    fullWellE: 10_000,
    darkNoiseE: 3,
    gainDnPerE: 0.25,
    bitDepth: 12,
    maxAnalogGain: 16,
    readoutMsPerFrame: 16,
    readoutEnergyPjPerPixel: 100,
    designWavelengthNm: 550,
    shutter: 'global',
    fillFactor: 1,
  });
  const isp = ispSchema.parse({ latencyMsPerFrame: 5, energyPjPerPixel: 50 });

  it('sums the stages: 2 ms exposure + 16 ms readout + 5 ms ISP + 12 ms inference = 35 ms (hand-worked)', () => {
    const b = frameBudget({ exposureUs: 2_000, sensor, isp, inferenceMs: 12, inferenceMj: 5, frameRateHz: 30 });
    expect(b.latency).toEqual({ exposureMs: 2, readoutMs: 16, ispMs: 5, inferenceMs: 12, totalMs: 35 });
  });

  it('energy: 2,073,600 px × 100 pJ = 0.20736 mJ readout, × 50 pJ = 0.10368 mJ ISP, plus 5 mJ inference; 30 fps → 0.1593 W', () => {
    const b = frameBudget({ exposureUs: 2_000, sensor, isp, inferenceMs: 12, inferenceMj: 5, frameRateHz: 30 });
    expect(b.energy.readoutMj).toBeCloseTo(0.20736, 12);
    expect(b.energy.ispMj).toBeCloseTo(0.10368, 12);
    expect(b.energy.inferenceMj).toBe(5);
    expect(b.energy.totalMj).toBeCloseTo(5.31104, 12);
    expect(b.averagePowerW).toBeCloseTo(0.1593312, 12);
  });
});
