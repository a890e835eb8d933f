import { ByteBuffer } from 'flatbuffers';
import { importOnnx, importTflite } from '../src/network-files/index.js';
import { onnxProto } from '../src/network-files/onnx-proto.js';
import { analyzeNetwork } from '../src/physics/network-cost.js';
import { networkSchema } from '../src/schema/index.js';
import { exportOnnx } from '../tests/support/onnx-export.js';
import { exportTflite } from '../tests/support/tflite-export.js';
import { mobileNetV2 } from '../tests/support/paper-networks.js';
import { median } from './figure.js';
import type { BenchFigure } from './figure.js';

const TARGET_MS = 500;
const RUNS = 5;

/**
 * Import of a MobileNetV2-sized ONNX file (3.5 M float weights, 14 MB, weights as initializers) to a costed
 * network document: decode, shape inference, document check and cost walk. The first (cold) run is the one a
 * user waits for; the median of the next runs is printed beside it, and the bare protobuf decode as the baseline.
 * The same network as a TFLite file (float32 weights in flatbuffer buffers, batch norm folded as converters do)
 * gives the `import-network-tflite` lines, with a walk of every table's vtable by the bare flatbuffers runtime
 * as their baseline.
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
  const tflite = exportTflite(mobileNetV2());
  const onceTflite = () => {
    const start = process.hrtime.bigint();
    const imported = importTflite(tflite, 'mobilenet-v2.tflite', { name: 'MobileNetV2' });
    const macs = analyzeNetwork(networkSchema.parse(imported.network)).macs;
    if (macs < 3e8) throw new Error(`bench: imported MobileNetV2 (TFLite) costs ${macs} MACs`);
    return Number(process.hrtime.bigint() - start) / 1e6;
  };
  const tfliteColdMs = onceTflite();
  const tfliteWarmMs = median(Array.from({ length: RUNS }, onceTflite));
  const tfliteBaselineMs = median(Array.from({ length: RUNS }, () => {
    const start = process.hrtime.bigint();
    // The runtime alone: the root table, then the first subgraph's tensor and operator vectors, entry by entry.
    const bb = new ByteBuffer(tflite);
    const root = bb.readInt32(0);
    const vec = (table: number, slot: number) => {
      const o = bb.__offset(table, slot);
      return o ? bb.__vector(table + o) : 0;
    };
    const subgraphs = vec(root, 8);
    const sg = bb.__indirect(subgraphs);
    let touched = 0;
    for (const slot of [4, 10]) {
      const v = vec(sg, slot);
      for (let i = 0; i < bb.__vector_len(sg + bb.__offset(sg, slot)); i++) touched += bb.__offset(bb.__indirect(v + 4 * i), 4);
    }
    if (touched < 0) throw new Error('unreachable');
    return Number(process.hrtime.bigint() - start) / 1e6;
  }));
  const round = (v: number) => Math.round(v * 10) / 10;
  return [
    { name: 'import-network', value: round(coldMs), unit: 'ms', target: TARGET_MS, ratio: Math.round((coldMs / TARGET_MS) * 1000) / 1000, ok: coldMs <= TARGET_MS },
    { name: 'import-network-warm', value: round(warmMs), unit: 'ms', target: TARGET_MS, ratio: Math.round((warmMs / TARGET_MS) * 1000) / 1000, ok: warmMs <= TARGET_MS },
    { name: 'import-network-decode-baseline', value: round(decodeMs), unit: 'ms', target: TARGET_MS, ratio: round(warmMs / Math.max(decodeMs, 0.01) * 10) / 10, ok: true },
    { name: 'import-network-tflite', value: round(tfliteColdMs), unit: 'ms', target: TARGET_MS, ratio: Math.round((tfliteColdMs / TARGET_MS) * 1000) / 1000, ok: tfliteColdMs <= TARGET_MS },
    { name: 'import-network-tflite-warm', value: round(tfliteWarmMs), unit: 'ms', target: TARGET_MS, ratio: Math.round((tfliteWarmMs / TARGET_MS) * 1000) / 1000, ok: tfliteWarmMs <= TARGET_MS },
    { name: 'import-network-tflite-read-baseline', value: round(tfliteBaselineMs), unit: 'ms', target: TARGET_MS, ratio: round(tfliteWarmMs / Math.max(tfliteBaselineMs, 0.01) * 10) / 10, ok: true },
  ];
}
