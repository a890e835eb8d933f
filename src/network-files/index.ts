export { importOnnx } from './onnx-import.js';
export type { ImportedNetwork, OnnxImportOptions } from './onnx-import.js';
