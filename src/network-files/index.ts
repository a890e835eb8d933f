export { importOnnx } from './onnx-import.js';
export { importNetworkFile, sniffFormat } from './import-file.js';
export type { ImportedNetwork, OnnxImportOptions } from './onnx-import.js';
export type { ModelFileFormat } from './import-file.js';
export { onnxInputShape } from './onnx-input.js';
