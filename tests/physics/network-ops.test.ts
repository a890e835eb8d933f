import { describe, expect, it } from 'vitest';
import { analyzeNetwork } from '../../src/physics/network-cost.js';
import { networkSchema, type NetworkInput } from '../../src/schema/index.js';

const run = (input: NetworkInput['input'], layers: NetworkInput['layers']) => analyzeNetwork(networkSchema.parse({ name: 't', input, layers }));
const img = { channels: 3, height: 224, width: 224 };

describe('window arithmetic (Dumoulin & Visin, "A guide to convolution arithmetic", 2016)', () => {
  it('valid padding: 7×7 stride 2 over 224 gives floor((224 − 7)/2) + 1 = 109, and 111 for the 227-pixel input of the SqueezeNet reference model (relation 5; from memory for the 227)', () => {
    expect(run(img, [{ op: 'conv', out: 96, kernel: 7, stride: 2, padding: 'valid' }]).layers[0]!.outShape).toEqual([96, 109, 109]);
    expect(run({ channels: 3, height: 227, width: 227 }, [{ op: 'conv', out: 96, kernel: 7, stride: 2, padding: 'valid' }]).layers[0]!.outShape).toEqual([96, 111, 111]);
  });

  it('explicit padding [3, 3, 3, 3] on a 7×7 stride-2 conv over 224 gives 112 (ResNet conv1, He et al. 2016 Table 1)', () => {
    expect(run(img, [{ op: 'conv', out: 64, kernel: 7, stride: 2, padding: [3, 3, 3, 3] }]).layers[0]!.outShape).toEqual([64, 112, 112]);
  });

  it('dilation 2 makes a 3×3 kernel span 5 pixels: 32 − 5 + 1 = 28 without padding (relation 15)', () => {
    const a = run({ channels: 8, height: 32, width: 32 }, [{ op: 'conv', out: 8, kernel: 3, dilation: 2, padding: 'valid' }]);
    expect(a.layers[0]!.outShape).toEqual([8, 28, 28]);
    expect(a.macs).toBe(3 * 3 * 8 * 8 * 28 * 28);
  });

  it('ceil-mode pooling rounds up: 3×3 stride 2 over 112 gives 56 instead of 55 (ONNX MaxPool ceil_mode)', () => {
    const floor = run({ channels: 4, height: 112, width: 112 }, [{ op: 'maxpool', kernel: 3, stride: 2, padding: 'valid' }]);
    const ceil = run({ channels: 4, height: 112, width: 112 }, [{ op: 'maxpool', kernel: 3, stride: 2, padding: 'valid', ceil: true }]);
    expect(floor.layers[0]!.outShape).toEqual([4, 55, 55]);
    expect(ceil.layers[0]!.outShape).toEqual([4, 56, 56]);
  });

  it('a kernel larger than the padded input is an error naming the layer and field', () => {
    expect(() => run({ channels: 1, height: 4, width: 4 }, [{ id: 'big', op: 'conv', out: 1, kernel: 7, padding: 'valid' }])).toThrow('layers[0].kernel: layer "big": the 7×7 window');
  });
});

describe('zero-MAC ops keep the graph whole (counting convention of Howard et al. 2017)', () => {
  it('squeeze-and-excitation: a c×1×1 gate multiplies the c×h×w map at no MACs (Hu et al., "Squeeze-and-Excitation Networks", 2018, Fig. 2)', () => {
    const a = run({ channels: 16, height: 8, width: 8 }, [
      { id: 'x', op: 'activation', fn: 'swish' },
      { op: 'avgpool', global: true },
      { op: 'conv', out: 4, kernel: 1, bias: true },
      { op: 'conv', out: 16, kernel: 1, bias: true },
      { id: 'gate', op: 'activation', fn: 'sigmoid' },
      { op: 'mul', inputs: ['x', 'gate'] },
    ]);
    expect(a.layers.at(-1)!.outShape).toEqual([16, 8, 8]);
    expect(a.layers.at(-1)!.macs).toBe(0);
    expect(a.macs).toBe(16 * 4 + 4 * 16);
    expect(a.params).toBe(16 * 4 + 4 + 4 * 16 + 16);
  });

  it('mul of shapes that neither match nor broadcast is an error naming both shapes', () => {
    expect(() => run({ channels: 4, height: 8, width: 8 }, [{ id: 'a', op: 'activation', fn: 'relu' }, { id: 'b', op: 'maxpool', kernel: 2 }, { op: 'mul', inputs: ['a', 'b'] }])).toThrow('mul needs equal shapes or a c×1×1 scale, got 4×8×8 (c×h×w) and 4×4×4 (c×h×w)');
  });

  it('resize by 2 doubles height and width; pad adds its pixels; flatten gives c·h·w×1×1; reshape keeps elements', () => {
    const a = run({ channels: 2, height: 3, width: 4 }, [
      { op: 'resize', scale: 2 },
      { op: 'pad', pads: [1, 0, 1, 2] },
      { op: 'reshape', shape: [2, 8, 10] },
      { op: 'flatten' },
      { op: 'matmul', out: 5, bias: true },
    ]);
    expect(a.layers.map((l) => l.outShape)).toEqual([[2, 6, 8], [2, 8, 10], [2, 8, 10], [160, 1, 1], [5, 1, 1]]);
    expect(a.macs).toBe(160 * 5);
    expect(a.params).toBe(160 * 5 + 5);
  });

  it('a reshape that changes the element count is an error naming the counts', () => {
    expect(() => run({ channels: 2, height: 3, width: 4 }, [{ op: 'reshape', shape: [2, 3, 5] }])).toThrow('layers[0].shape: layer "0": reshape to 2×3×5 (c×h×w) needs 30 elements, the input 2×3×4 (c×h×w) has 24');
  });

  it('batch norm counts 4 parameters per channel apart from params; unfolded it costs one MAC per element', () => {
    const folded = run({ channels: 8, height: 4, width: 4 }, [{ op: 'batchnorm' }]);
    const unfolded = run({ channels: 8, height: 4, width: 4 }, [{ op: 'batchnorm', folded: false }]);
    expect([folded.macs, folded.params, folded.batchNormParams]).toEqual([0, 0, 32]);
    expect([unfolded.macs, unfolded.params, unfolded.batchNormParams]).toEqual([128, 0, 32]);
  });

  it('the schema names a bad padding by path', () => {
    const r = networkSchema.safeParse({ name: 't', input: img, layers: [{ op: 'conv', out: 1, kernel: 3, padding: [1, 1, 1] }] });
    expect(r.success).toBe(false);
    expect(r.error!.issues[0]!.path.slice(0, 2)).toEqual(['layers', 0]);
  });
});
