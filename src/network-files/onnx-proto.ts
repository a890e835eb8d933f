import { createRequire } from 'node:module';
import type { onnx } from 'onnx-proto';

/** The ONNX protobuf messages (package `onnx-proto`, CommonJS: loaded through require so ESM sees its export). */
export const onnxProto: typeof onnx = (createRequire(import.meta.url)('onnx-proto') as { onnx: typeof onnx }).onnx;
