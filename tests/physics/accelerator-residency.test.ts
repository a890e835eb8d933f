import { describe, expect, it } from 'vitest';
import { acceleratorCost, analyzeNetwork, residentLayers, sramEnergyPjPerByte } from '../../src/physics/index.js';
import { acceleratorSchema, type Network } from '../../src/schema/index.js';

/**
 * Hand-worked roofline cases (Williams, Waterman, Patterson, "Roofline", CACM 2009) for partial weight
 * residency, spilled tensors read later, utilisation per op kind and dispatch overhead. Invented accelerator
 * sized for round numbers: 100 MAC units × 100 MHz = 1e7 MAC/ms; DRAM 1 GB/s = 1e6 bytes/ms; energies 0 except
 * where a case needs them.
 */
const accel = acceleratorSchema.parse({
  macUnits: 100, clockMhz: 100, precision: 'int8', sramKib: 512, dramBandwidthGbPerS: 1,
  energyPjPerMac: 0, energyPjPerSramByte: 0, energyPjPerDramByte: 1, staticPowerMw: 0, flashReadMbPerS: 100,
});

/** conv 3×3 16→32 on 16×8×8 (4,608 weight bytes), then fc 2048→100 with bias (204,900 bytes). */
const twoLayers: Network = {
  name: 'roofline example',
  input: { channels: 16, height: 8, width: 8 },
  layers: [
    { id: 'conv', op: 'conv', out: 32, kernel: 3, stride: 1, groups: 1, bias: false },
    { id: 'fc', op: 'fc', out: 100, bias: true },
  ],
};

describe('partial weight residency (greedy by DRAM bytes saved per KiB, largest first, first fit)', () => {
  const a = analyzeNetwork(twoLayers);
  it('an 8 KiB weight buffer keeps the conv weights (4,608 B) resident while the fc weights (204,900 B) stream', () => {
    const c = acceleratorCost(a, accel, { weightBufferKib: 8, activationBufferKib: 8 });
    expect(c.layers.map((l) => l.weightsResident)).toEqual([true, false]);
    expect(c.residentWeightBytes).toBe(4_608);
    expect(c.weightsResident).toBe(false);
    // conv reads only the 1,024-byte frame; fc streams 204,900 weight bytes (hand-worked).
    expect(c.layers.map((l) => l.dramBytes)).toEqual([1_024, 204_900]);
    expect(c.dramBytes).toBe(205_924);
  });
  it('the largest layer goes first: 201 KiB holds the fc weights (200.1 KiB) and then the conv weights no longer fit', () => {
    const c = acceleratorCost(a, accel, { weightBufferKib: 201, activationBufferKib: 8 });
    expect(c.layers.map((l) => l.weightsResident)).toEqual([false, true]);
    expect(c.dramBytes).toBe(1_024 + 4_608);
  });
  it('first fit: a smaller layer that still fits after a larger one is taken', () => {
    // 10, 6, 5 bytes in 11 bytes: 10 first, 6 no longer fits, 5 does not either → only the 10; in 15: 10 + 5.
    expect([...residentLayers([10, 6, 5], 11)]).toEqual([1, 0, 0]);
    expect([...residentLayers([10, 6, 5], 15)]).toEqual([1, 0, 1]);
    expect([...residentLayers([10, 6, 5], 21)]).toEqual([1, 1, 1]);
  });
  it('MobileNetV1 1.0-224 at fp16 with a 4 MiB weight buffer: streaming all weights costs 8.42 MB, keeping the largest layers resident cuts it below 4.3 MB', async () => {
    const { mobileNetV1 } = await import('../support/physics-mobilenet.js');
    const m = analyzeNetwork(mobileNetV1(1, 224));
    const fp16 = { ...accel, precision: 'fp16' as const };
    const big = 1e6;
    const none = acceleratorCost(m, fp16, { weightBufferKib: 0, activationBufferKib: big });
    const part = acceleratorCost(m, fp16, { weightBufferKib: 4096, activationBufferKib: big });
    // 4,210,088 parameters × 2 bytes (Howard et al. 2017, Table 1 rebuild) + the 224×224×3 frame × 2 bytes.
    expect(none.dramBytes).toBe(4_210_088 * 2 + 224 * 224 * 3 * 2);
    expect(part.residentWeightBytes).toBeLessThanOrEqual(4096 * 1024);
    expect(part.residentWeightBytes).toBeGreaterThan(4096 * 1024 * 0.9);
    expect(part.dramBytes).toBe(none.dramBytes - part.residentWeightBytes);
  });
});

describe('spilled tensors: charged on their write and on every read', () => {
  // conv a (16×8×8 → 16×8×8, 1,024 → 1,024 bytes), conv b (1,024 → 1,024), add(a, b) (2,048 in → 1,024 out).
  const skip: Network = {
    name: 'skip example',
    input: { channels: 16, height: 8, width: 8 },
    layers: [
      { id: 'a', op: 'conv', out: 16, kernel: 1, stride: 1, groups: 1, bias: false },
      { id: 'b', op: 'conv', out: 16, kernel: 1, stride: 1, groups: 1, bias: false },
      { id: 'sum', op: 'add', inputs: ['a', 'b'] },
    ],
  };
  const s = analyzeNetwork(skip);
  it('with a 3 KiB buffer nothing spills: only the frame is read (weights resident)', () => {
    const c = acceleratorCost(s, accel, { weightBufferKib: 64, activationBufferKib: 3 });
    expect(c.layers.map((l) => l.dramBytes)).toEqual([1_024, 0, 0]);
  });
  it("when the add's 3,072-byte working set does not fit 2.5 KiB, a's output is written once and read by b and, two layers later, by the add", () => {
    // a fits (2,048 B) and b fits (2,048 B), but the add (2,048 + 1,024 = 3,072 B) does not: a, b and the add's output spill.
    const c = acceleratorCost(s, accel, { weightBufferKib: 64, activationBufferKib: 2.5 });
    expect(c.layers.map((l) => l.outputSpilled)).toEqual([true, true, true]);
    // a: frame 1,024 + write 1,024; b: read a 1,024 + write 1,024; add: read a 1,024 + read b 1,024 + write 1,024 (hand-worked).
    expect(c.layers.map((l) => l.dramBytes)).toEqual([2_048, 2_048, 3_072]);
  });
  it('in all 7,168 bytes: the frame, three spilled writes and three spilled reads of 1,024 bytes each', () => {
    const c = acceleratorCost(s, accel, { weightBufferKib: 64, activationBufferKib: 2.5 });
    expect(c.dramBytes).toBe(7_168);
  });
});

describe('utilisation per op kind and per-layer overhead', () => {
  const a = analyzeNetwork(twoLayers);
  it('conv at 50 % utilisation takes twice its peak compute time, 0.0589824 ms (294,912 MACs at 5e6 MAC/ms)', () => {
    const c = acceleratorCost(a, { ...accel, utilisation: { conv: 0.5 } }, { weightBufferKib: 256, activationBufferKib: 8 });
    expect(c.layers[0]!.computeMs).toBeCloseTo(0.0589824, 12);
    expect(c.layers[1]!.computeMs).toBeCloseTo(0.02048, 12);
  });
  it('a 10 µs dispatch overhead adds 0.01 ms to each layer', () => {
    const base = acceleratorCost(a, accel, { weightBufferKib: 256, activationBufferKib: 8 });
    const slow = acceleratorCost(a, { ...accel, layerOverheadUs: 10 }, { weightBufferKib: 256, activationBufferKib: 8 });
    expect(slow.latencyMs - base.latencyMs).toBeCloseTo(0.02, 12);
  });
  it('SRAM energy per byte by buffer size interpolates in log₂ size: Horowitz 2014 8 KB 10 pJ, 32 KB 20 pJ per 64 bits → 16 KiB 1.875 pJ/B', () => {
    const points = [{ bufferKib: 8, energyPjPerByte: 1.25 }, { bufferKib: 32, energyPjPerByte: 2.5 }, { bufferKib: 1024, energyPjPerByte: 12.5 }];
    expect(sramEnergyPjPerByte(9, points, 16)).toBeCloseTo(1.875, 12);
    expect(sramEnergyPjPerByte(9, points, 4)).toBe(1.25);
    expect(sramEnergyPjPerByte(9, points, 2048)).toBe(12.5);
    expect(sramEnergyPjPerByte(9, undefined, 2048)).toBe(9);
  });
});
