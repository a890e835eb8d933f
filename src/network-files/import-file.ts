import { InputError } from '../schema/issues.js';
import { importOnnx, type ImportedNetwork, type OnnxImportOptions } from './onnx-import.js';

export type ModelFileFormat = 'onnx' | 'tflite';

/** TFLite files carry the identifier "TFL3" at bytes 4–7 (flatbuffers file_identifier, TFLite schema.fbs). */
export function sniffFormat(bytes: Uint8Array): ModelFileFormat {
  if (bytes.length >= 8 && String.fromCharCode(bytes[4]!, bytes[5]!, bytes[6]!, bytes[7]!) === 'TFL3') return 'tflite';
  return 'onnx';
}

/** Import a model file of either format, told apart by its content rather than its name. */
export function importNetworkFile(bytes: Uint8Array, source: string, options: OnnxImportOptions = {}): ImportedNetwork & { format: ModelFileFormat } {
  const format = sniffFormat(bytes);
  if (format === 'tflite') {
    throw new InputError(`${source} is a TFLite file; this version imports ONNX files only`, [{ path: '(file)', message: 'TFLite import is not available' }], source);
  }
  return { ...importOnnx(bytes, source, options), format };
}
