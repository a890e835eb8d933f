import type { Network } from '../../src/schema/index.js';

/** MobileNetV1 pointwise output channels of the 13 depthwise-separable blocks and their depthwise strides (Howard et al. 2017, Table 1). */
const BLOCKS: ReadonlyArray<[number, number]> = [
  [64, 1], [128, 2], [128, 1], [256, 2], [256, 1], [512, 2],
  [512, 1], [512, 1], [512, 1], [512, 1], [512, 1], [1024, 2], [1024, 1],
];

/**
 * MobileNetV1 at width multiplier α and input resolution (Howard et al. 2017, §3.3–3.4):
 * every layer's channel count is scaled by α, the input is resolution × resolution.
 * Built independently of the JSON file so the two can be checked against each other.
 */
export function mobileNetV1(widthMultiplier = 1, resolution = 224): Network {
  const ch = (c: number): number => Math.round(widthMultiplier * c);
  const layers: Network['layers'] = [{ id: 'conv1', op: 'conv', out: ch(32), kernel: 3, stride: 2, groups: 1, bias: false }];
  BLOCKS.forEach(([out, stride], i) => {
    layers.push({ id: `dw${i + 1}`, op: 'dwconv', kernel: 3, stride, bias: false });
    layers.push({ id: `pw${i + 1}`, op: 'conv', out: ch(out), kernel: 1, stride: 1, groups: 1, bias: false });
  });
  layers.push({ id: 'pool', op: 'avgpool', global: true });
  layers.push({ id: 'fc', op: 'fc', out: 1000, bias: true });
  return {
    name: `MobileNetV1 ${widthMultiplier} ${resolution}`,
    input: { channels: 3, height: resolution, width: resolution },
    layers,
  };
}
