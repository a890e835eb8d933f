import { importOnnx, type ImportedNetwork, type OnnxImportOptions } from './onnx-import.js';
import { importTflite } from './tflite-import.js';

export type ModelFileFormat = 'onnx' | 'tflite';

/** TFLite files carry the identifier "TFL3" at bytes 4–7 (flatbuffers file_identifier, TFLite schema.fbs). */
export function sniffFormat(bytes: Uint8Array): ModelFileFormat {
  if (bytes.length >= 8 && String.fromCharCode(bytes[4]!, bytes[5]!, bytes[6]!, bytes[7]!) === 'TFL3') return 'tflite';
  return 'onnx';
}

export interface ImportedFile extends ImportedNetwork {
  format: ModelFileFormat;
  /** TFLite only: parameters by the element type the file stores them in. */
  weightStorage?: Record<string, number>;
}

/**
 * Import a model file of either format, told apart by its content rather than its name; a file named
 * .tflite without the TFLite identifier is read as TFLite all the same, so its error says what is wrong.
 */
export function importNetworkFile(bytes: Uint8Array, source: string, options: OnnxImportOptions = {}): ImportedFile {
  const format = sniffFormat(bytes) === 'tflite' || /\.tflite$/i.test(source) ? 'tflite' : 'onnx';
  if (format === 'tflite') return { ...importTflite(bytes, source, options), format };
  return { ...importOnnx(bytes, source, options), format };
}
