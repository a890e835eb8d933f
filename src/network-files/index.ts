export { importOnnx } from './onnx-import.js';
export { importNetworkFile, sniffFormat } from './import-file.js';
export type { ImportedNetwork, OnnxImportOptions } from './onnx-import.js';
export type { ModelFileFormat } from './import-file.js';
export { onnxInputShape } from './onnx-input.js';
export { importTflite } from './tflite-import.js';
export type { TfliteImported } from './tflite-import.js';
export type { ImportedFile } from './import-file.js';
