import { importOnnx } from '../src/network-files/index.js';
import { onnxProto } from '../src/network-files/onnx-proto.js';
import { analyzeNetwork } from '../src/physics/network-cost.js';
import { networkSchema } from '../src/schema/index.js';
import { exportOnnx } from '../tests/support/onnx-export.js';
import { mobileNetV2 } from '../tests/support/paper-networks.js';
import { median } from './figure.js';
import type { BenchFigure } from './figure.js';

const TARGET_MS = 500;
const RUNS = 5;

/**
 * Import of a MobileNetV2-sized ONNX file (3.5 M float weights, 14 MB, weights as initializers) to a costed
 * network document: decode, shape inference, document check and cost walk. The first (cold) run is the one a
 * user waits for; the median of the next runs is printed beside it, and the bare protobuf decode as the baseline.
 */
export async function run(): Promise<BenchFigure[]> {
  const bytes = exportOnnx(mobileNetV2());
  const once = () => {
    const start = process.hrtime.bigint();
    const imported = importOnnx(bytes, 'mobilenet-v2.onnx', { name: 'MobileNetV2' });
    const macs = analyzeNetwork(networkSchema.parse(imported.network)).macs;
    if (macs < 3e8) throw new Error(`bench: imported MobileNetV2 costs ${macs} MACs`);
    return Number(process.hrtime.bigint() - start) / 1e6;
  };
  const coldMs = once();
  const warmMs = median(Array.from({ length: RUNS }, once));
  const decodeMs = median(Array.from({ length: RUNS }, () => {
    const start = process.hrtime.bigint();
    onnxProto.ModelProto.decode(bytes);
    return Number(process.hrtime.bigint() - start) / 1e6;
  }));
  const round = (v: number) => Math.round(v * 10) / 10;
  return [
    { name: 'import-network', value: round(coldMs), unit: 'ms', target: TARGET_MS, ratio: Math.round((coldMs / TARGET_MS) * 1000) / 1000, ok: coldMs <= TARGET_MS },
    { name: 'import-network-warm', value: round(warmMs), unit: 'ms', target: TARGET_MS, ratio: Math.round((warmMs / TARGET_MS) * 1000) / 1000, ok: warmMs <= TARGET_MS },
    { name: 'import-network-decode-baseline', value: round(decodeMs), unit: 'ms', target: TARGET_MS, ratio: round(warmMs / Math.max(decodeMs, 0.01) * 10) / 10, ok: true },
  ];
}
