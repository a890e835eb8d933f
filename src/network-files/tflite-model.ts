/**
 * The parts of a TFLite model file that a network document needs, read with the flatbuffers runtime.
 * Field ids follow TFLite's published flatbuffers schema (schema.fbs, "TFL3", Apache-2.0; tables Model,
 * SubGraph, Tensor, Buffer, OperatorCode, Operator and the builtin option tables read below). Only those
 * tables are read; nothing is generated from the schema.
 */
import { FbFile, FlatbufferDamage, type FbTable } from './flatbuffer-reader.js';

/** TensorType of schema.fbs and its element size in bytes (0 where the size is not fixed). */
export const TENSOR_TYPES: Record<number, { name: string; bytes: number }> = {
  0: { name: 'float32', bytes: 4 },
  1: { name: 'float16', bytes: 2 },
  2: { name: 'int32', bytes: 4 },
  3: { name: 'uint8', bytes: 1 },
  4: { name: 'int64', bytes: 8 },
  5: { name: 'string', bytes: 0 },
  6: { name: 'bool', bytes: 1 },
  7: { name: 'int16', bytes: 2 },
  9: { name: 'int8', bytes: 1 },
  10: { name: 'float64', bytes: 8 },
};

export interface TfliteTensor {
  index: number;
  name: string;
  shape: number[];
  type: number;
  /** The constant's bytes when the tensor has a non-empty buffer (weights, shapes, paddings). */
  data?: Uint8Array;
  /** A constant that lives past 2 GB, outside the flatbuffer (offset/size in the Buffer table). */
  external?: boolean;
}

export interface TfliteOperator {
  index: number;
  /** BuiltinOperator code, or -1 for a custom op. */
  code: number;
  customCode?: string;
  inputs: number[];
  outputs: number[];
  options?: FbTable;
}

export interface TfliteModel {
  version: number;
  description?: string;
  tensors: TfliteTensor[];
  inputs: number[];
  outputs: number[];
  operators: TfliteOperator[];
  subgraphName?: string;
}

/** BuiltinOperator values ≥ 127 live only in builtin_code; older files only fill deprecated_builtin_code (schema.fbs, OperatorCode). */
function builtinCode(code: FbTable): number {
  const deprecated = code.int8(0, 'deprecated_builtin_code');
  const extended = code.int32(3, 'builtin_code');
  return Math.max(deprecated, extended);
}

export function readTflite(bytes: Uint8Array): TfliteModel {
  const file = new FbFile(bytes);
  const id = file.identifier();
  if (id !== 'TFL3') throw new FlatbufferDamage(`the file identifier is ${JSON.stringify(id)}, not "TFL3"`);
  const model = file.root();
  const version = model.uint32(0, 'version');
  const opcodes = model.tables(1, 'operator_codes');
  const subgraphs = model.tables(2, 'subgraphs');
  const buffers = model.tables(4, 'buffers');
  const main = subgraphs[0];
  if (!main) throw new FlatbufferDamage('the model has no subgraph');
  const tensors = main.tables(0, 'tensors').map((t, index): TfliteTensor => {
    const buffer = t.uint32(2, 'buffer');
    const b = buffer > 0 ? buffers[buffer] : undefined;
    if (buffer > 0 && !b) throw new FlatbufferDamage(`${t.what} points at buffer ${buffer} of ${buffers.length}`);
    const data = b?.bytes(0, 'data');
    const external = b !== undefined && b.uint64(1, 'offset') > 1n;
    return {
      index,
      name: t.string(3, 'name') ?? `tensor_${index}`,
      shape: t.int32s(0, 'shape') ?? [],
      type: t.int8(1, 'type'),
      ...(data && data.length > 0 ? { data } : {}),
      ...(external ? { external: true } : {}),
    };
  });
  const operators = main.tables(3, 'operators').map((o, index): TfliteOperator => {
    const opcodeIndex = o.uint32(0, 'opcode_index');
    const code = opcodes[opcodeIndex];
    if (!code) throw new FlatbufferDamage(`${o.what} uses operator code ${opcodeIndex} of ${opcodes.length}`);
    const builtin = builtinCode(code);
    const custom = builtin === 32 ? code.string(1, 'custom_code') : undefined;
    const options = o.table(4, 'builtin_options');
    return {
      index,
      code: builtin === 32 ? -1 : builtin,
      ...(custom !== undefined ? { customCode: custom } : {}),
      inputs: o.int32s(1, 'inputs') ?? [],
      outputs: o.int32s(2, 'outputs') ?? [],
      ...(options ? { options } : {}),
    };
  });
  const description = model.string(3, 'description');
  const subgraphName = main.string(4, 'name');
  return {
    version,
    ...(description !== undefined ? { description } : {}),
    tensors,
    inputs: main.int32s(1, 'inputs') ?? [],
    outputs: main.int32s(2, 'outputs') ?? [],
    operators,
    ...(subgraphName !== undefined ? { subgraphName } : {}),
  };
}

/** Little-endian integer values of a constant int32 or int64 tensor (shapes, axes, paddings, sizes). */
export function intValues(t: TfliteTensor): number[] | undefined {
  if (!t.data) return undefined;
  const view = new DataView(t.data.buffer, t.data.byteOffset, t.data.byteLength);
  if (t.type === 2) return Array.from({ length: t.data.byteLength / 4 }, (_, i) => view.getInt32(4 * i, true));
  if (t.type === 4) return Array.from({ length: t.data.byteLength / 8 }, (_, i) => Number(view.getBigInt64(8 * i, true)));
  return undefined;
}

export function floatValues(t: TfliteTensor): number[] | undefined {
  if (!t.data) return undefined;
  const view = new DataView(t.data.buffer, t.data.byteOffset, t.data.byteLength);
  if (t.type === 0) return Array.from({ length: t.data.byteLength / 4 }, (_, i) => view.getFloat32(4 * i, true));
  return undefined;
}
