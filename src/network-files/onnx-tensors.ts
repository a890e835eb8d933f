/**
 * Reading ONNX tensors and node attributes (onnx.proto, ONNX IR spec "TensorProto" and "AttributeProto"):
 * dimensions always, values only of small integer or float tensors (shapes, axes, pads, scales), which
 * the shape inference folds. Weights are sized from their dimensions, never read element by element.
 */
import type { onnx } from 'onnx-proto';

type Int = number | { toNumber(): number };
export const toInt = (v: Int): number => (typeof v === 'number' ? v : v.toNumber());

/** TensorProto.DataType values used here (onnx.proto). */
export const DataType = { FLOAT: 1, UINT8: 2, INT8: 3, INT32: 6, INT64: 7, BOOL: 9, FLOAT16: 10, DOUBLE: 11 } as const;

/** Values are read for tensors of at most this many elements: enough for any shape or pad list. */
export const MAX_FOLDED_ELEMENTS = 4096;

export interface KnownTensor {
  dims: number[];
  /** Element values when the tensor is small and of a numeric type; undefined otherwise. */
  values?: number[];
}

export const elementCount = (dims: readonly number[]): number => dims.reduce((a, b) => a * b, 1);

function rawValues(raw: Uint8Array, dataType: number, count: number): number[] | undefined {
  const view = new DataView(raw.buffer, raw.byteOffset, raw.byteLength);
  const out: number[] = [];
  const size = dataType === DataType.INT64 || dataType === DataType.DOUBLE ? 8 : dataType === DataType.FLOAT || dataType === DataType.INT32 ? 4 : 1;
  if (raw.byteLength < count * size) return undefined;
  for (let i = 0; i < count; i++) {
    const at = i * size;
    if (dataType === DataType.INT64) out.push(Number(view.getBigInt64(at, true)));
    else if (dataType === DataType.DOUBLE) out.push(view.getFloat64(at, true));
    else if (dataType === DataType.FLOAT) out.push(view.getFloat32(at, true));
    else if (dataType === DataType.INT32) out.push(view.getInt32(at, true));
    else if (dataType === DataType.INT8) out.push(view.getInt8(at));
    else if (dataType === DataType.UINT8 || dataType === DataType.BOOL) out.push(view.getUint8(at));
    else return undefined;
  }
  return out;
}

/** Dimensions and (for small numeric tensors) values of a TensorProto. */
export function readTensor(t: onnx.ITensorProto): KnownTensor {
  const dims = (t.dims ?? []).map(toInt);
  const count = elementCount(dims);
  if (count > MAX_FOLDED_ELEMENTS) return { dims };
  const dataType = t.dataType ?? 0;
  let values: number[] | undefined;
  if (t.rawData && t.rawData.length > 0) values = rawValues(t.rawData, dataType, count);
  else if (t.int64Data && t.int64Data.length > 0) values = t.int64Data.map(toInt);
  else if (t.int32Data && t.int32Data.length > 0) values = [...t.int32Data];
  else if (t.floatData && t.floatData.length > 0) values = [...t.floatData];
  else if (t.doubleData && t.doubleData.length > 0) values = [...t.doubleData];
  else if (count === 0) values = [];
  return values !== undefined && values.length === count ? { dims, values } : { dims };
}

export type Attributes = Map<string, onnx.IAttributeProto>;

export function attributesOf(node: onnx.INodeProto): Attributes {
  return new Map((node.attribute ?? []).map((a) => [a.name ?? '', a]));
}

export const intsAttr = (a: Attributes, name: string): number[] | undefined => {
  const v = a.get(name);
  return v?.ints && v.ints.length > 0 ? v.ints.map(toInt) : undefined;
};
export const intAttr = (a: Attributes, name: string): number | undefined => {
  const v = a.get(name);
  return v?.i !== undefined && v.i !== null ? toInt(v.i) : undefined;
};
export const floatAttr = (a: Attributes, name: string): number | undefined => {
  const v = a.get(name);
  return v?.f !== undefined && v.f !== null ? v.f : undefined;
};
export const stringAttr = (a: Attributes, name: string): string | undefined => {
  const v = a.get(name);
  return v?.s && v.s.length > 0 ? new TextDecoder().decode(v.s) : undefined;
};

/** The tensor a Constant node holds (opset 1–13 forms: value, value_float(s), value_int(s)). */
export function constantNodeValue(a: Attributes): KnownTensor | undefined {
  const value = a.get('value');
  if (value?.t) return readTensor(value.t);
  const f = floatAttr(a, 'value_float');
  if (f !== undefined) return { dims: [], values: [f] };
  const i = intAttr(a, 'value_int');
  if (i !== undefined) return { dims: [], values: [i] };
  const fs = a.get('value_floats')?.floats;
  if (fs && fs.length > 0) return { dims: [fs.length], values: [...fs] };
  const is = intsAttr(a, 'value_ints');
  if (is) return { dims: [is.length], values: is };
  return undefined;
}
