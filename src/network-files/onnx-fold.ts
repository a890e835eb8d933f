/**
 * Constant folding of the small integer computations that exported graphs use to build shapes at run
 * time (ONNX operator semantics: Shape, Gather, Slice, Concat, Unsqueeze, Squeeze, Cast, ConstantOfShape,
 * and elementwise arithmetic over constants). Returns undefined when the node is not one of these or
 * its inputs are not known, so the caller can say which node could not be computed.
 */
import type { onnx } from 'onnx-proto';
import { attributesOf, elementCount, intAttr, intsAttr, MAX_FOLDED_ELEMENTS, type KnownTensor } from './onnx-tensors.js';

/** Anything whose dimensions are known: a constant, or a computed activation. */
export interface Dims {
  dims: number[];
}

export type Lookup = (name: string) => (Dims & { values?: number[] }) | undefined;

const normAxis = (axis: number, rank: number): number => (axis < 0 ? axis + rank : axis);

function elementwise(op: string, a: KnownTensor, b: KnownTensor): KnownTensor | undefined {
  if (!a.values || !b.values) return undefined;
  const n = Math.max(a.values.length, b.values.length);
  if (a.values.length !== n && a.values.length !== 1) return undefined;
  if (b.values.length !== n && b.values.length !== 1) return undefined;
  const at = (t: number[], i: number): number => (t.length === 1 ? t[0]! : t[i]!);
  const f: Record<string, (x: number, y: number) => number> = {
    Add: (x, y) => x + y,
    Sub: (x, y) => x - y,
    Mul: (x, y) => x * y,
    Div: (x, y) => (Number.isInteger(x) && Number.isInteger(y) ? Math.trunc(x / y) : x / y),
  };
  const fn = f[op];
  if (!fn) return undefined;
  const values = Array.from({ length: n }, (_, i) => fn(at(a.values!, i), at(b.values!, i)));
  return { dims: a.values.length >= b.values.length ? a.dims : b.dims, values };
}

function slice1d(data: KnownTensor, starts: number[], ends: number[], axes: number[] | undefined, steps: number[] | undefined): KnownTensor | undefined {
  if (!data.values || data.dims.length !== 1) return undefined;
  if ((axes && axes.some((a) => normAxis(a, 1) !== 0)) || starts.length !== 1 || ends.length !== 1) return undefined;
  const len = data.values.length;
  const step = steps?.[0] ?? 1;
  if (step === 0) return undefined;
  const clamp = (v: number, lo: number, hi: number) => Math.min(Math.max(v, lo), hi);
  let start = starts[0]!;
  let end = ends[0]!;
  if (start < 0) start += len;
  if (end < 0) end += len;
  const out: number[] = [];
  if (step > 0) {
    start = clamp(start, 0, len);
    end = clamp(end, 0, len);
    for (let i = start; i < end; i += step) out.push(data.values[i]!);
  } else {
    start = clamp(start, -1, len - 1);
    end = clamp(end, -1, len - 1);
    for (let i = start; i > end; i += step) out.push(data.values[i]!);
  }
  return { dims: [out.length], values: out };
}

/** Fold one node whose inputs are all known; the result is its first output. */
export function foldNode(node: onnx.INodeProto, lookup: Lookup): KnownTensor | undefined {
  const a = attributesOf(node);
  const inputs = (node.input ?? []).map((n) => (n === '' ? undefined : lookup(n)));
  const first = inputs[0];
  const valuesOf = (i: number): number[] | undefined => inputs[i]?.values;
  switch (node.opType) {
    case 'Shape': {
      if (!first) return undefined;
      const rank = first.dims.length;
      const start = normAxis(intAttr(a, 'start') ?? 0, rank);
      const end = normAxis(intAttr(a, 'end') ?? rank, rank);
      const values = first.dims.slice(start, end);
      return { dims: [values.length], values };
    }
    case 'Size':
      return first ? { dims: [], values: [elementCount(first.dims)] } : undefined;
    case 'Cast':
    case 'Identity':
      return first?.values ? { dims: first.dims, values: first.values } : undefined;
    case 'Gather': {
      const data = first;
      const idx = valuesOf(1);
      if (!data?.values || !idx || data.dims.length !== 1 || normAxis(intAttr(a, 'axis') ?? 0, 1) !== 0) return undefined;
      const values = idx.map((i) => data.values![i < 0 ? i + data.values!.length : i]!);
      if (values.some((v) => v === undefined)) return undefined;
      return { dims: inputs[1]!.dims, values };
    }
    case 'Slice': {
      if (!first) return undefined;
      const starts = inputs.length > 1 ? valuesOf(1) : intsAttr(a, 'starts');
      const ends = inputs.length > 2 ? valuesOf(2) : intsAttr(a, 'ends');
      if (!starts || !ends) return undefined;
      const axes = inputs.length > 3 ? valuesOf(3) : intsAttr(a, 'axes');
      const steps = inputs.length > 4 ? valuesOf(4) : undefined;
      return slice1d(first as KnownTensor, starts, ends, axes, steps);
    }
    case 'Concat': {
      if (inputs.some((t) => !t?.values)) return undefined;
      const values = inputs.flatMap((t) => t!.values!);
      return { dims: [values.length], values };
    }
    case 'Unsqueeze':
    case 'Squeeze': {
      if (!first?.values) return undefined;
      // A scalar unsqueezed to [1] or a [1] squeezed to a scalar: the values are unchanged.
      const axes = inputs.length > 1 ? valuesOf(1) : intsAttr(a, node.opType === 'Unsqueeze' ? 'axes' : 'axes');
      const dims = node.opType === 'Unsqueeze' ? [...first.dims] : first.dims.filter((d, i) => !(d === 1 && (!axes || axes.map((x) => normAxis(x, first.dims.length)).includes(i))));
      if (node.opType === 'Unsqueeze') for (const ax of [...(axes ?? [])].sort((x, y) => x - y)) dims.splice(normAxis(ax, first.dims.length + (axes?.length ?? 0)), 0, 1);
      return { dims, values: first.values };
    }
    case 'ConstantOfShape': {
      const dims = valuesOf(0);
      if (!dims || elementCount(dims) > MAX_FOLDED_ELEMENTS) return dims ? { dims } : undefined;
      const fill = a.get('value')?.t?.floatData?.[0] ?? 0;
      return { dims, values: new Array<number>(elementCount(dims)).fill(fill) };
    }
    case 'Add':
    case 'Sub':
    case 'Mul':
    case 'Div':
      return first && inputs[1] ? elementwise(node.opType, first as KnownTensor, inputs[1] as KnownTensor) : undefined;
    default:
      return undefined;
  }
}
