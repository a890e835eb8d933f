/**
 * Shapes, multiply-accumulates and parameters of a layer-list network (src/schema/network.ts).
 * Counting convention of Howard et al., "MobileNets", 2017 (eq. 5, Tables 1–7): MACs of convolution,
 * fully connected and matmul layers only; pooling, additions, products, activations, resizes and reshapes
 * count 0; parameters are weights plus enabled biases. Batch-norm parameters are counted apart
 * (`batchNormParams`), as the papers leave them out. Window sizes follow src/physics/network-window.ts.
 */
import { InputError, type InputIssue } from '../schema/issues.js';
import type { Layer, Network } from '../schema/network.js';
import { pairOf, windowShape } from './network-window.js';

/** Channels, height, width. */
export type Shape = [number, number, number];

export interface LayerAnalysis {
  id: string;
  op: string;
  /** c, h, w of the first input. */
  inShape: Shape;
  outShape: Shape;
  macs: number;
  params: number;
  /** Elements of all inputs together. */
  inputElements: number;
  outputElements: number;
  /** Index of the layer producing each input; −1 for the network's input. */
  inputLayers: number[];
}

export interface NetworkAnalysis {
  macs: number;
  params: number;
  /** Scale, shift, mean and variance of every batch-norm layer (4 per channel); not in `params`. */
  batchNormParams: number;
  /** The largest inputs + output elements of any one layer. */
  peakActivationElements: number;
  inputElements: number;
  layers: LayerAnalysis[];
}

export const LAYER_OPS = [
  'conv',
  'dwconv',
  'fc',
  'matmul',
  'maxpool',
  'avgpool',
  'add',
  'mul',
  'concat',
  'activation',
  'resize',
  'reshape',
  'flatten',
  'pad',
  'batchnorm',
] as const;

const MULTI_INPUT_OPS = new Set(['add', 'mul', 'concat']);
const elements = (s: Shape): number => s[0] * s[1] * s[2];
const showShape = (s: Shape): string => `${s[0]}×${s[1]}×${s[2]} (c×h×w)`;
const same = (a: Shape, b: Shape): boolean => a[0] === b[0] && a[1] === b[1] && a[2] === b[2];

interface LayerCost {
  outShape: Shape;
  macs: number;
  params: number;
  batchNormParams?: number;
}

/** Thrown inside the walk; carries the field at fault within the layer. */
class LayerProblem extends Error {
  constructor(
    message: string,
    readonly field?: string,
  ) {
    super(message);
  }
}

type WindowLayer = Extract<Layer, { op: 'conv' | 'dwconv' | 'maxpool' | 'avgpool' }>;

function windowOutHw(layer: WindowLayer, inShape: Shape, kernel: [number, number], stride: [number, number]): [number, number] {
  const dilation = layer.op === 'conv' || layer.op === 'dwconv' ? pairOf(layer.dilation, 1) : ([1, 1] as [number, number]);
  const ceil = layer.op === 'maxpool' || layer.op === 'avgpool' ? (layer.ceil ?? false) : false;
  const [h, w] = windowShape([inShape[1], inShape[2]], kernel, stride, dilation, layer.padding, ceil);
  if (h < 1 || w < 1) {
    throw new LayerProblem(`the ${kernel[0]}×${kernel[1]} window (dilation ${dilation.join('×')}) does not fit the padded ${inShape[1]}×${inShape[2]} input`, 'kernel');
  }
  return [h, w];
}

function convCost(layer: Extract<Layer, { op: 'conv' }>, inShape: Shape): LayerCost {
  const cin = inShape[0];
  const groups = layer.groups ?? 1;
  if (cin % groups !== 0) throw new LayerProblem(`groups ${groups} does not divide the ${cin} input channels`, 'groups');
  if (layer.out % groups !== 0) throw new LayerProblem(`groups ${groups} does not divide the ${layer.out} output channels`, 'groups');
  const kernel = pairOf(layer.kernel, 1);
  const [h, w] = windowOutHw(layer, inShape, kernel, pairOf(layer.stride, 1));
  const outShape: Shape = [layer.out, h, w];
  const weights = kernel[0] * kernel[1] * (cin / groups) * layer.out;
  // Howard et al. 2017, eq. 2 generalised to groups: D_K²·(M/g)·N·D_F².
  return { outShape, macs: weights * h * w, params: weights + (layer.bias ? layer.out : 0) };
}

function dwconvCost(layer: Extract<Layer, { op: 'dwconv' }>, inShape: Shape): LayerCost {
  const c = inShape[0];
  const kernel = pairOf(layer.kernel, 1);
  const [h, w] = windowOutHw(layer, inShape, kernel, pairOf(layer.stride, 1));
  const weights = kernel[0] * kernel[1] * c;
  // Howard et al. 2017, eq. 5, depthwise term: D_K²·M·D_F².
  return { outShape: [c, h, w], macs: weights * h * w, params: weights + (layer.bias ? c : 0) };
}

function fcCost(layer: Extract<Layer, { op: 'fc' }>, inShape: Shape): LayerCost {
  const inputs = elements(inShape);
  const weights = inputs * layer.out;
  return { outShape: [layer.out, 1, 1], macs: weights, params: weights + ((layer.bias ?? true) ? layer.out : 0) };
}

function matmulCost(layer: Extract<Layer, { op: 'matmul' }>, inShape: Shape): LayerCost {
  const [k, h, w] = inShape;
  const weights = k * layer.out;
  return { outShape: [layer.out, h, w], macs: weights * h * w, params: weights + (layer.bias ? layer.out : 0) };
}

function poolCost(layer: Extract<Layer, { op: 'maxpool' | 'avgpool' }>, inShape: Shape): LayerCost {
  const c = inShape[0];
  if (layer.global) return { outShape: [c, 1, 1], macs: 0, params: 0 };
  if (layer.kernel === undefined) throw new LayerProblem(`${layer.op} needs a kernel, or global: true`, 'kernel');
  const kernel = pairOf(layer.kernel, 1);
  const [h, w] = windowOutHw(layer, inShape, kernel, pairOf(layer.stride ?? layer.kernel, 1));
  return { outShape: [c, h, w], macs: 0, params: 0 };
}

function addCost(shapes: Shape[]): LayerCost {
  const [a, b] = shapes as [Shape, Shape];
  if (!same(a, b)) throw new LayerProblem(`add needs equal shapes, got ${showShape(a)} and ${showShape(b)}`, 'inputs');
  return { outShape: [a[0], a[1], a[2]], macs: 0, params: 0 };
}

/** Equal shapes, or one side a per-channel (c×1×1) or single (1×1×1) scale. */
function mulCost(shapes: Shape[]): LayerCost {
  const [a, b] = shapes as [Shape, Shape];
  const scales = (big: Shape, small: Shape) => small[1] === 1 && small[2] === 1 && (small[0] === big[0] || small[0] === 1);
  if (same(a, b) || scales(a, b)) return { outShape: [a[0], a[1], a[2]], macs: 0, params: 0 };
  if (scales(b, a)) return { outShape: [b[0], b[1], b[2]], macs: 0, params: 0 };
  throw new LayerProblem(`mul needs equal shapes or a c×1×1 scale, got ${showShape(a)} and ${showShape(b)}`, 'inputs');
}

function concatCost(shapes: Shape[]): LayerCost {
  const first = shapes[0]!;
  let channels = 0;
  for (const s of shapes) {
    if (s[1] !== first[1] || s[2] !== first[2]) {
      throw new LayerProblem(`concat needs equal height and width, got ${showShape(first)} and ${showShape(s)}`, 'inputs');
    }
    channels += s[0];
  }
  return { outShape: [channels, first[1], first[2]], macs: 0, params: 0 };
}

function resizeCost(layer: Extract<Layer, { op: 'resize' }>, inShape: Shape): LayerCost {
  const [c, h, w] = inShape;
  if ((layer.scale === undefined) === (layer.size === undefined)) throw new LayerProblem('resize needs exactly one of scale or size', 'scale');
  if (layer.size) return { outShape: [c, layer.size[0], layer.size[1]], macs: 0, params: 0 };
  const [sh, sw] = typeof layer.scale === 'number' ? [layer.scale, layer.scale] : layer.scale!;
  // ONNX Resize: output size = floor(input size × scale).
  const outShape: Shape = [c, Math.floor(h * sh), Math.floor(w * sw)];
  if (outShape[1] < 1 || outShape[2] < 1) throw new LayerProblem(`scale ${sh}×${sw} leaves no pixel of the ${h}×${w} input`, 'scale');
  return { outShape, macs: 0, params: 0 };
}

function reshapeCost(layer: Extract<Layer, { op: 'reshape' }>, inShape: Shape): LayerCost {
  const outShape: Shape = [layer.shape[0], layer.shape[1], layer.shape[2]];
  if (elements(outShape) !== elements(inShape)) {
    throw new LayerProblem(`reshape to ${showShape(outShape)} needs ${elements(outShape)} elements, the input ${showShape(inShape)} has ${elements(inShape)}`, 'shape');
  }
  return { outShape, macs: 0, params: 0 };
}

function batchnormCost(layer: Extract<Layer, { op: 'batchnorm' }>, inShape: Shape): LayerCost {
  const folded = layer.folded ?? true;
  return { outShape: [inShape[0], inShape[1], inShape[2]], macs: folded ? 0 : elements(inShape), params: 0, batchNormParams: 4 * inShape[0] };
}

function layerInputRefs(layer: Layer): unknown[] | undefined {
  if (layer.op === 'add' || layer.op === 'mul' || layer.op === 'concat') return Array.isArray(layer.inputs) ? layer.inputs : [];
  return layer.input === undefined ? undefined : [layer.input];
}

function costOf(layer: Layer, shapes: Shape[]): LayerCost {
  const first = shapes[0]!;
  switch (layer.op) {
    case 'conv':
      return convCost(layer, first);
    case 'dwconv':
      return dwconvCost(layer, first);
    case 'fc':
      return fcCost(layer, first);
    case 'matmul':
      return matmulCost(layer, first);
    case 'maxpool':
    case 'avgpool':
      return poolCost(layer, first);
    case 'add':
      return addCost(shapes);
    case 'mul':
      return mulCost(shapes);
    case 'concat':
      return concatCost(shapes);
    case 'activation':
      return { outShape: [first[0], first[1], first[2]], macs: 0, params: 0 };
    case 'resize':
      return resizeCost(layer, first);
    case 'reshape':
      return reshapeCost(layer, first);
    case 'flatten':
      return { outShape: [elements(first), 1, 1], macs: 0, params: 0 };
    case 'pad':
      return { outShape: [first[0], first[1] + layer.pads[0] + layer.pads[2], first[2] + layer.pads[1] + layer.pads[3]], macs: 0, params: 0 };
    case 'batchnorm':
      return batchnormCost(layer, first);
    default:
      throw new LayerProblem(`unknown op ${JSON.stringify((layer as { op: unknown }).op)}; expected one of ${LAYER_OPS.join(', ')}`, 'op');
  }
}

/**
 * Walk the layer list: each layer reads the previous one (the network input for the first layer)
 * unless `input` (or `inputs` for add, mul and concat) names earlier layers by id. Ids default to the layer's index.
 * Throws InputError whose issue names the layer (path `layers[i]…`, its id) on the first bad layer.
 */
export function analyzeNetwork(network: Network): NetworkAnalysis {
  const inputShape: Shape = [network.input.channels, network.input.height, network.input.width];
  const shapeById = new Map<string, Shape>();
  const indexById = new Map<string, number>();
  const layers: LayerAnalysis[] = [];
  let previous = inputShape;
  let macs = 0;
  let params = 0;
  let batchNormParams = 0;
  let peak = 0;
  network.layers.forEach((layer, i) => {
    const id = layer.id === undefined ? String(i) : String(layer.id);
    const fail = (message: string, field?: string): never => {
      const path = `layers[${i}]${field ? `.${field}` : ''}`;
      const issue: InputIssue = { path, message: `layer "${id}": ${message}` };
      const name = network.id ?? network.name;
      throw new InputError(`network ${JSON.stringify(name)}: ${path}: ${issue.message}`, [issue]);
    };
    if (shapeById.has(id)) fail(`duplicate layer id "${id}"`, 'id');
    const refs = layerInputRefs(layer);
    const refField = MULTI_INPUT_OPS.has(layer.op) ? 'inputs' : 'input';
    const shapes: Shape[] = [];
    const inputLayers: number[] = [];
    if (refs === undefined) {
      shapes.push(previous);
      inputLayers.push(i - 1);
    } else {
      if (refs.length === 0) fail(`${layer.op} needs a list of input layer ids`, 'inputs');
      for (const ref of refs) {
        const shape = shapeById.get(String(ref));
        if (!shape) fail(`input ${JSON.stringify(ref)} does not name an earlier layer`, refField);
        shapes.push(shape!);
        inputLayers.push(indexById.get(String(ref))!);
      }
    }
    let cost: LayerCost;
    try {
      cost = costOf(layer, shapes);
    } catch (e) {
      if (e instanceof LayerProblem) return fail(e.message, e.field);
      throw e;
    }
    let inputElements = 0;
    for (const s of shapes) inputElements += elements(s);
    const outputElements = elements(cost.outShape);
    const first = shapes[0]!;
    layers.push({ id, op: layer.op, inShape: [first[0], first[1], first[2]], outShape: cost.outShape, macs: cost.macs, params: cost.params, inputElements, outputElements, inputLayers });
    macs += cost.macs;
    params += cost.params;
    batchNormParams += cost.batchNormParams ?? 0;
    peak = Math.max(peak, inputElements + outputElements);
    shapeById.set(id, cost.outShape);
    indexById.set(id, i);
    previous = cost.outShape;
  });
  return { macs, params, batchNormParams, peakActivationElements: peak, inputElements: elements(inputShape), layers };
}
