import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { analyzeNetwork } from '../../src/physics/index.js';
import { InputError, networkSchema, type Network } from '../../src/schema/index.js';
import { mobileNetV1 } from '../support/physics-mobilenet.js';

const jsonPath = new URL('../../profiles/greenhouse-demo/networks/mobilenet-v1-1.0-224.json', import.meta.url);
const mobileNetFile = networkSchema.parse(JSON.parse(readFileSync(jsonPath, 'utf8')));

describe('MobileNetV1 (Howard et al., "MobileNets", 2017)', () => {
  const a = analyzeNetwork(mobileNetFile);

  it('1.0-224 has 569 M mult-adds and 4.2 M parameters within 1 % (Table 6)', () => {
    expect(Math.abs(a.macs / 569e6 - 1)).toBeLessThan(0.01);
    expect(Math.abs(a.params / 4.2e6 - 1)).toBeLessThan(0.01);
  });

  it('the rebuild of Table 1 counts exactly 568,740,352 MACs and 4,210,088 parameters (Howard et al., "MobileNets", 2017, Table 1 layers, counted by hand)', () => {
    expect(a.macs).toBe(568_740_352);
    expect(a.params).toBe(4_210_088);
  });

  it('the feature maps follow Table 1: 112×112×32 after the first conv, 7×7×1024 before the pool, 1000 classes out', () => {
    expect(a.layers[0]!.outShape).toEqual([32, 112, 112]);
    expect(a.layers.find((l) => l.id === 'pool')!.inShape).toEqual([1024, 7, 7]);
    expect(a.layers.at(-1)!.outShape).toEqual([1000, 1, 1]);
    expect(a.layers).toHaveLength(1 + 13 * 2 + 2);
  });

  it('the largest layer traffic is the first pointwise layer, 112×112×(32 + 64) elements (Table 1 shapes)', () => {
    expect(a.peakActivationElements).toBe(112 * 112 * 96);
    expect(a.inputElements).toBe(224 * 224 * 3);
  });

  it('the JSON file equals the independently built 1.0-224 network layer for layer', () => {
    const built = analyzeNetwork(mobileNetV1(1, 224));
    expect(built.layers).toEqual(a.layers);
  });

  // The paper prints MACs to the whole million and parameters to 0.1 M; we accept MACs within 1 %
  // and parameters within half a unit of the last printed digit (±0.05 M).
  const variants: Array<[string, number, number, number, number]> = [
    ['width 0.75 at 224: 325 M / 2.6 M (Table 6)', 0.75, 224, 325e6, 2.6e6],
    ['width 0.5 at 224: 149 M / 1.3 M (Table 6)', 0.5, 224, 149e6, 1.3e6],
    ['width 0.25 at 224: 41 M / 0.5 M (Table 6)', 0.25, 224, 41e6, 0.5e6],
    ['width 1.0 at 192: 418 M / 4.2 M (Table 7)', 1, 192, 418e6, 4.2e6],
    ['width 1.0 at 160: 290 M / 4.2 M (Table 7)', 1, 160, 290e6, 4.2e6],
    ['width 1.0 at 128: 186 M / 4.2 M (Table 7)', 1, 128, 186e6, 4.2e6],
  ];
  for (const [title, alpha, resolution, macs, params] of variants) {
    it(`MobileNetV1 ${title}`, () => {
      const v = analyzeNetwork(mobileNetV1(alpha, resolution));
      expect(Math.abs(v.macs / macs - 1)).toBeLessThan(0.01);
      expect(Math.abs(v.params - params)).toBeLessThanOrEqual(0.05e6);
    });
  }
});

describe('depthwise-separable cost (Howard et al. 2017, eq. 5 and Table 3)', () => {
  const input = { channels: 512, height: 14, width: 14 };

  it('a full 3×3 convolution 14×14×512 → 512 costs 462 M mult-adds and 2.36 M parameters', () => {
    const full = analyzeNetwork({ name: 'full', input, layers: [{ op: 'conv', out: 512, kernel: 3, stride: 1, groups: 1, bias: false }] });
    expect(full.macs).toBe(3 * 3 * 512 * 512 * 14 * 14);
    expect(Math.round(full.macs / 1e6)).toBe(462);
    expect(Math.round(full.params / 1e4) / 100).toBe(2.36);
  });

  it('depthwise + pointwise costs D_K²·M·D_F² + M·N·D_F² = 52.3 M mult-adds and 0.27 M parameters', () => {
    const sep = analyzeNetwork({
      name: 'separable',
      input,
      layers: [
        { op: 'dwconv', kernel: 3, stride: 1, bias: false },
        { op: 'conv', out: 512, kernel: 1, stride: 1, groups: 1, bias: false },
      ],
    });
    expect(sep.macs).toBe(9 * 512 * 196 + 512 * 512 * 196);
    expect(Math.round(sep.macs / 1e5) / 10).toBe(52.3);
    expect(Math.round(sep.params / 1e4) / 100).toBe(0.27);
  });

  it('a grouped convolution with groups = channels costs the same as a depthwise one (eq. 5 depthwise term)', () => {
    const grouped = analyzeNetwork({ name: 'g', input, layers: [{ op: 'conv', out: 512, kernel: 3, stride: 1, groups: 512, bias: false }] });
    const depthwise = analyzeNetwork({ name: 'd', input, layers: [{ op: 'dwconv', kernel: 3, stride: 1, bias: false }] });
    expect(grouped.macs).toBe(depthwise.macs);
    expect(grouped.params).toBe(depthwise.params);
  });
});

describe('branches, pooling and same padding (format rules in src/schema/network.ts)', () => {
  const branchy: Network = {
    name: 'branches',
    input: { channels: 8, height: 15, width: 15 },
    layers: [
      { id: 'stem', op: 'conv', out: 16, kernel: 3, stride: 2, groups: 1, bias: true },
      { id: 'a', op: 'conv', out: 16, kernel: 1, stride: 1, groups: 1, bias: false },
      { id: 'b', input: 'stem', op: 'conv', out: 16, kernel: 3, stride: 1, groups: 4, bias: false },
      { id: 'sum', op: 'add', inputs: ['a', 'b'] },
      { id: 'cat', op: 'concat', inputs: ['sum', 'stem', 'a'] },
      { id: 'pool', op: 'maxpool', kernel: 2, global: false },
      { op: 'fc', out: 10, bias: true },
    ],
  };
  const r = analyzeNetwork(branchy);

  it('same padding rounds up: 15 px at stride 2 gives 8 px; a 2×2 pool of 8 gives 4', () => {
    expect(r.layers[0]!.outShape).toEqual([16, 8, 8]);
    expect(r.layers[5]!.outShape).toEqual([48, 4, 4]);
  });

  it('counts biases where enabled and grouped weights k²·(cin/g)·cout (hand-worked)', () => {
    expect(r.layers[0]!.params).toBe(9 * 8 * 16 + 16);
    expect(r.layers[2]!.params).toBe(9 * 4 * 16);
    expect(r.layers[2]!.macs).toBe(9 * 4 * 16 * 64);
    expect(r.layers[6]!.params).toBe(48 * 16 * 10 + 10);
  });

  it('add and concat read every input; pooling, add and concat cost no MACs (Howard et al. 2017 counting convention)', () => {
    expect(r.layers[3]!.inputElements).toBe(2 * 16 * 64);
    expect(r.layers[4]!.inputElements).toBe(3 * 16 * 64);
    expect(r.layers[4]!.outShape).toEqual([48, 8, 8]);
    expect(r.layers[3]!.macs + r.layers[4]!.macs + r.layers[5]!.macs).toBe(0);
    expect(r.layers[6]!.id).toBe('6');
    expect(r.peakActivationElements).toBe(3 * 16 * 64 + 48 * 64);
  });
});

describe('bad networks name the layer at fault', () => {
  const input = { channels: 8, height: 8, width: 8 };
  function problem(layers: unknown[]): { message: string; path: string } {
    try {
      analyzeNetwork({ name: 'bad', input, layers } as Network);
    } catch (e) {
      expect(e).toBeInstanceOf(InputError);
      const issue = (e as InputError).issues[0]!;
      return { message: issue.message, path: issue.path };
    }
    throw new Error('expected analyzeNetwork to throw');
  }

  it('unknown op (schema bypassed)', () => {
    const p = problem([{ op: 'conv', out: 8, kernel: 1 }, { id: 'odd', op: 'transformer' }]);
    expect(p.path).toBe('layers[1].op');
    expect(p.message).toMatch(/layer "odd".*unknown op "transformer"/);
  });

  it('unknown input id', () => {
    const p = problem([{ op: 'conv', out: 8, kernel: 1 }, { id: 'x', op: 'conv', out: 8, kernel: 1, input: 'nowhere' }]);
    expect(p.path).toBe('layers[1].input');
    expect(p.message).toMatch(/layer "x".*"nowhere" does not name an earlier layer/);
  });

  it('a layer cannot read a later layer', () => {
    const p = problem([{ op: 'conv', out: 8, kernel: 1, input: 'later' }, { id: 'later', op: 'conv', out: 8, kernel: 1 }]);
    expect(p.path).toBe('layers[0].input');
  });

  it('duplicate id', () => {
    const p = problem([{ id: 'a', op: 'conv', out: 8, kernel: 1 }, { id: 'a', op: 'conv', out: 8, kernel: 1 }]);
    expect(p.path).toBe('layers[1].id');
    expect(p.message).toMatch(/duplicate layer id "a"/);
  });

  it('add with mismatched shapes', () => {
    const p = problem([
      { id: 'a', op: 'conv', out: 8, kernel: 1 },
      { id: 'b', op: 'conv', out: 16, kernel: 1 },
      { id: 'sum', op: 'add', inputs: ['a', 'b'] },
    ]);
    expect(p.path).toBe('layers[2].inputs');
    expect(p.message).toMatch(/layer "sum".*8×8×8.*16×8×8/);
  });

  it('concat with mismatched height and width', () => {
    const p = problem([
      { id: 'a', op: 'conv', out: 8, kernel: 1 },
      { id: 'b', op: 'conv', out: 8, kernel: 3, stride: 2 },
      { id: 'cat', op: 'concat', inputs: ['a', 'b'] },
    ]);
    expect(p.path).toBe('layers[2].inputs');
    expect(p.message).toMatch(/layer "cat".*equal height and width/);
  });

  it('groups that do not divide the input channels', () => {
    const p = problem([{ id: 'g', op: 'conv', out: 6, kernel: 3, groups: 3 }]);
    expect(p.path).toBe('layers[0].groups');
    expect(p.message).toMatch(/layer "g".*groups 3 does not divide the 8 input channels/);
  });

  it('a pooling layer with neither kernel nor global', () => {
    const p = problem([{ id: 'p', op: 'avgpool' }]);
    expect(p.path).toBe('layers[0].kernel');
  });
});
