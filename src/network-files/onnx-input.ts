import { InputError } from '../schema/issues.js';
import { onnxProto } from './onnx-proto.js';
import { toInt } from './onnx-tensors.js';

/** The dimensions of an ONNX file's image input (symbolic ones as undefined), without reading its nodes further. */
export function onnxInputShape(bytes: Uint8Array, source: string): { name: string; dims: Array<number | undefined> } {
  let graph;
  try {
    graph = onnxProto.ModelProto.decode(bytes).graph;
  } catch (e) {
    throw new InputError(`${source} is not a readable ONNX file: ${(e as Error).message}`, [{ path: '(file)', message: (e as Error).message }], source);
  }
  const initializers = new Set((graph?.initializer ?? []).map((t) => t.name ?? ''));
  const input = (graph?.input ?? []).find((i) => !initializers.has(i.name ?? ''));
  if (!input) throw new InputError(`${source} is not an ONNX model with an input`, [{ path: 'graph.input', message: 'no input' }], source);
  const dims = (input.type?.tensorType?.shape?.dim ?? []).map((d) => (d.dimValue !== undefined && d.dimValue !== null && toInt(d.dimValue) > 0 ? toInt(d.dimValue) : undefined));
  return { name: input.name ?? '', dims };
}
