/**
 * ONNX operators that become layers of the network document, with their output dimensions (ONNX
 * operator definitions: Conv, Gemm, MatMul, pooling, BatchNormalization, activations, Resize, Pad,
 * Flatten, Reshape). The caller has checked which inputs are activations and which are constants.
 */
import type { onnx } from 'onnx-proto';
import { pairOf, windowShape } from '../physics/network-window.js';
import type { NetworkInput, Padding } from '../schema/network.js';
import { attributesOf, elementCount, floatAttr, intAttr, intsAttr, stringAttr, type Attributes } from './onnx-tensors.js';

export type LayerDraft = NetworkInput['layers'][number];

/** A problem with one node; the importer adds the node's place and name. */
export class NodeProblem extends Error {}

export interface Operand {
  dims: number[];
  values?: number[];
}

export interface Mapped {
  /** No layer when the node only passes its input on (Identity, Dropout, a reshape to the same dims). */
  layer?: LayerDraft;
  outDims: number[];
}

const sizeField = (p: [number, number]): number | [number, number] => (p[0] === p[1] ? p[0] : p);

function padding(a: Attributes, rank: number): Padding {
  const auto = stringAttr(a, 'auto_pad') ?? 'NOTSET';
  if (auto === 'SAME_UPPER' || auto === 'SAME_LOWER') return 'same';
  if (auto === 'VALID') return 'valid';
  if (auto !== 'NOTSET') throw new NodeProblem(`auto_pad ${auto} is not an ONNX value`);
  const pads = intsAttr(a, 'pads') ?? new Array<number>(rank * 2).fill(0);
  if (pads.length !== 4) throw new NodeProblem(`pads has ${pads.length} values; 2-D windows need 4`);
  // ONNX order: [x1_begin, x2_begin, x1_end, x2_end] = [top, left, bottom, right].
  return [pads[0]!, pads[1]!, pads[2]!, pads[3]!];
}

function spatial(x: Operand, op: string): [number, number, number, number] {
  if (x.dims.length !== 4) throw new NodeProblem(`${op} needs a 4-D N×C×H×W input, got ${x.dims.length}-D [${x.dims.join(', ')}]`);
  return [x.dims[0]!, x.dims[1]!, x.dims[2]!, x.dims[3]!];
}

function window(x: Operand, a: Attributes, kernel: [number, number], op: string, ceil: boolean) {
  const [n, , h, w] = spatial(x, op);
  const stride = pairOf(intsAttr(a, 'strides') as [number, number] | undefined, 1);
  const dilation = pairOf(intsAttr(a, 'dilations') as [number, number] | undefined, 1);
  const pad = padding(a, 2);
  const [oh, ow] = windowShape([h, w], kernel, stride, dilation, pad, ceil);
  if (oh < 1 || ow < 1) throw new NodeProblem(`the ${kernel.join('×')} window does not fit the ${h}×${w} input`);
  return { n, stride, dilation, pad, oh, ow };
}

function conv(node: onnx.INodeProto, a: Attributes, x: Operand, weight: Operand | undefined, hasBias: boolean): Mapped {
  if (!weight) throw new NodeProblem('its weights (input 1) are not a constant or initializer');
  if (weight.dims.length !== 4) throw new NodeProblem(`weights have ${weight.dims.length} dimensions; only 2-D convolutions (4-D weights) are supported`);
  const [m, cPerGroup, kh, kw] = weight.dims as [number, number, number, number];
  const cin = spatial(x, 'Conv')[1];
  const groups = intAttr(a, 'group') ?? 1;
  if (cPerGroup * groups !== cin) throw new NodeProblem(`weights [${weight.dims.join(', ')}] with group ${groups} do not fit ${cin} input channels`);
  const k: [number, number] = [kh, kw];
  const kernelAttr = intsAttr(a, 'kernel_shape');
  if (kernelAttr && (kernelAttr[0] !== kh || kernelAttr[1] !== kw)) throw new NodeProblem(`kernel_shape [${kernelAttr.join(', ')}] disagrees with the weights [${weight.dims.join(', ')}]`);
  const wnd = window(x, a, k, 'Conv', false);
  const common = {
    kernel: sizeField(k),
    stride: sizeField(wnd.stride),
    padding: wnd.pad,
    ...(wnd.dilation[0] !== 1 || wnd.dilation[1] !== 1 ? { dilation: sizeField(wnd.dilation) } : {}),
    bias: hasBias,
  };
  const depthwise = groups === cin && groups === m && cPerGroup === 1 && groups > 1;
  const layer: LayerDraft = depthwise ? { op: 'dwconv', ...common } : { op: 'conv', out: m, groups, ...common };
  void node;
  return { layer, outDims: [wnd.n, m, wnd.oh, wnd.ow] };
}

function pool(op: string, a: Attributes, x: Operand): Mapped {
  const kind = op.includes('Max') ? 'maxpool' : 'avgpool';
  if (op.startsWith('Global')) {
    const [n, c] = spatial(x, op);
    return { layer: { op: kind, global: true }, outDims: [n, c, 1, 1] };
  }
  const kernel = intsAttr(a, 'kernel_shape');
  if (!kernel || kernel.length !== 2) throw new NodeProblem('kernel_shape must give 2 values');
  const dil = intsAttr(a, 'dilations');
  if (dil && dil.some((d) => d !== 1)) throw new NodeProblem('dilated pooling is not supported');
  const ceil = (intAttr(a, 'ceil_mode') ?? 0) === 1;
  const k: [number, number] = [kernel[0]!, kernel[1]!];
  const wnd = window(x, a, k, op, ceil);
  const layer: LayerDraft = { op: kind, kernel: sizeField(k), stride: sizeField(wnd.stride), padding: wnd.pad, ...(ceil ? { ceil: true } : {}) };
  return { layer, outDims: [wnd.n, x.dims[1]!, wnd.oh, wnd.ow] };
}

function gemm(a: Attributes, x: Operand, b: Operand | undefined, hasBias: boolean): Mapped {
  if (!b || b.dims.length !== 2) throw new NodeProblem('its B input must be a 2-D constant weight matrix');
  if ((intAttr(a, 'transA') ?? 0) !== 0) throw new NodeProblem('transA = 1 is not supported');
  if (x.dims.length !== 2) throw new NodeProblem(`Gemm needs a 2-D input, got [${x.dims.join(', ')}]`);
  const transB = (intAttr(a, 'transB') ?? 0) === 1;
  const [k, out] = transB ? [b.dims[1]!, b.dims[0]!] : [b.dims[0]!, b.dims[1]!];
  if (k !== x.dims[1]) throw new NodeProblem(`weights [${b.dims.join(', ')}] do not fit the ${x.dims[1]} input features`);
  return { layer: { op: 'fc', out, bias: hasBias }, outDims: [x.dims[0]!, out] };
}

function matmul(x: Operand, b: Operand | undefined): Mapped {
  if (!b) throw new NodeProblem('MatMul of two computed tensors is not supported; the second input must be constant weights');
  if (b.dims.length !== 2 || x.dims.length !== 2) throw new NodeProblem(`only [N, K] × [K, M] MatMul is supported, got [${x.dims.join(', ')}] × [${b.dims.join(', ')}]`);
  if (b.dims[0] !== x.dims[1]) throw new NodeProblem(`weights [${b.dims.join(', ')}] do not fit the ${x.dims[1]} input features`);
  return { layer: { op: 'matmul', out: b.dims[1]! }, outDims: [x.dims[0]!, b.dims[1]!] };
}

/** The project's c×h×w of an ONNX N×… activation: batch dropped, missing axes 1. */
export function chw(dims: readonly number[]): [number, number, number] {
  const rest = dims.slice(1);
  if (rest.length > 3) throw new NodeProblem(`tensors of rank ${dims.length} are not supported`);
  while (rest.length < 3) rest.push(1);
  return [rest[0]!, rest[1]!, rest[2]!];
}

/** A change of dimensions without arithmetic: nothing, a flatten, or a reshape. */
export function reshapeTo(x: Operand, outDims: number[]): Mapped {
  if (outDims[0] !== x.dims[0]) throw new NodeProblem(`a reshape that changes the batch dimension (${x.dims[0]} → ${outDims[0]}) is not supported`);
  if (elementCount(outDims) !== elementCount(x.dims)) throw new NodeProblem(`reshape to [${outDims.join(', ')}] changes the element count of [${x.dims.join(', ')}]`);
  if (outDims.length === 2 && x.dims.length !== 2) return { layer: { op: 'flatten' }, outDims };
  const from = chw(x.dims);
  const to = chw(outDims);
  if (from[0] === to[0] && from[1] === to[1] && from[2] === to[2]) return { outDims };
  return { layer: { op: 'reshape', shape: to }, outDims };
}

export function resolveReshape(x: Operand, shape: number[], allowZero: boolean): number[] {
  const out = shape.map((d, i) => (d === 0 && !allowZero ? x.dims[i]! : d));
  const known = out.filter((d) => d !== -1).reduce((p, d) => p * d, 1);
  const missing = out.indexOf(-1);
  if (missing >= 0) out[missing] = elementCount(x.dims) / known;
  if (out.some((d) => !Number.isInteger(d) || d < 1)) throw new NodeProblem(`shape [${shape.join(', ')}] cannot reshape [${x.dims.join(', ')}]`);
  return out;
}

const ACTIVATIONS: Record<string, LayerDraft & { op: 'activation' }> = {
  Relu: { op: 'activation', fn: 'relu' },
  Sigmoid: { op: 'activation', fn: 'sigmoid' },
  HardSigmoid: { op: 'activation', fn: 'hard-sigmoid' },
  HardSwish: { op: 'activation', fn: 'hard-swish' },
  Tanh: { op: 'activation', fn: 'tanh' },
  LeakyRelu: { op: 'activation', fn: 'leaky-relu' },
  Gelu: { op: 'activation', fn: 'gelu' },
  Softmax: { op: 'activation', fn: 'softmax' },
};

export const isActivationOp = (op: string): boolean => op in ACTIVATIONS || op === 'Clip';

/**
 * The layer of a node whose first input is an activation. `operands[i]` is the node's i-th input
 * (undefined when absent), `constant[i]` says whether it is a constant.
 */
export function mapNode(node: onnx.INodeProto, operands: Array<Operand | undefined>, constant: boolean[]): Mapped {
  const op = node.opType ?? '';
  const a = attributesOf(node);
  const x = operands[0]!;
  const constAt = (i: number) => (constant[i] ? operands[i] : undefined);
  if (op in ACTIVATIONS) return { layer: { ...ACTIVATIONS[op]! }, outDims: x.dims };
  switch (op) {
    case 'Conv':
      return conv(node, a, x, constAt(1), operands[2] !== undefined);
    case 'Gemm':
      return gemm(a, x, constAt(1), operands[2] !== undefined);
    case 'MatMul':
      return matmul(x, constAt(1));
    case 'MaxPool':
    case 'AveragePool':
    case 'GlobalAveragePool':
    case 'GlobalMaxPool':
      return pool(op, a, x);
    case 'BatchNormalization':
      return { layer: { op: 'batchnorm' }, outDims: x.dims };
    case 'Clip': {
      const lo = operands[1]?.values?.[0] ?? floatAttr(a, 'min');
      const hi = operands[2]?.values?.[0] ?? floatAttr(a, 'max');
      return { layer: { op: 'activation', fn: lo === 0 && hi === 6 ? 'relu6' : 'clip' }, outDims: x.dims };
    }
    case 'Flatten': {
      const axis = intAttr(a, 'axis') ?? 1;
      if (axis !== 1) throw new NodeProblem(`Flatten with axis ${axis} is not supported (only 1)`);
      return { layer: { op: 'flatten' }, outDims: [x.dims[0]!, elementCount(x.dims.slice(1))] };
    }
    case 'Identity':
    case 'Dropout':
    case 'Cast':
      return { outDims: x.dims };
    case 'Pad': {
      const pads = operands[1]?.values ?? intsAttr(a, 'pads');
      if (!pads || pads.length !== 8) throw new NodeProblem('pads must be a constant of 8 values for a 4-D input');
      if (pads[0] || pads[1] || pads[4] || pads[5]) throw new NodeProblem('padding of the batch or channel axis is not supported');
      const [t, l, b, r] = [pads[2]!, pads[3]!, pads[6]!, pads[7]!];
      return { layer: { op: 'pad', pads: [t, l, b, r] }, outDims: [x.dims[0]!, x.dims[1]!, x.dims[2]! + t + b, x.dims[3]! + l + r] };
    }
    case 'Resize':
    case 'Upsample': {
      const [n, c, h, w] = spatial(x, op);
      const scales = op === 'Upsample' ? operands[1]?.values : operands[2]?.values;
      const sizes = op === 'Resize' ? operands[3]?.values : undefined;
      if (sizes && sizes.length === 4) return { layer: { op: 'resize', size: [sizes[2]!, sizes[3]!] }, outDims: [n, c, sizes[2]!, sizes[3]!] };
      if (!scales || scales.length !== 4) throw new NodeProblem('scales or sizes must be constants of 4 values');
      if (scales[0] !== 1 || scales[1] !== 1) throw new NodeProblem('resizing the batch or channel axis is not supported');
      const scale = scales[2] === scales[3] ? scales[2]! : ([scales[2]!, scales[3]!] as [number, number]);
      return { layer: { op: 'resize', scale }, outDims: [n, c, Math.floor(h * scales[2]!), Math.floor(w * scales[3]!)] };
    }
    default:
      throw new NodeProblem(`op ${op} is not supported`);
  }
}
