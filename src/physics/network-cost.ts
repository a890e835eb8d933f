/**
 * Shapes, multiply-accumulates and parameters of a layer-list network (src/schema/network.ts).
 * Counting convention of Howard et al., "MobileNets", 2017 (eq. 5, Tables 1–7): MACs of convolution
 * and fully connected layers only; pooling, additions and concatenations count 0; parameters are
 * weights plus enabled biases, batch norm not counted. Padding is "same": out = ceil(in / stride).
 */
import { InputError, type InputIssue } from '../schema/issues.js';
import type { Layer, Network } from '../schema/network.js';

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
  /** The largest inputs + output elements of any one layer. */
  peakActivationElements: number;
  inputElements: number;
  layers: LayerAnalysis[];
}

export const LAYER_OPS = ['conv', 'dwconv', 'fc', 'maxpool', 'avgpool', 'add', 'concat'] as const;

const elements = (s: Shape): number => s[0] * s[1] * s[2];
const sameOut = (size: number, stride: number): number => Math.ceil(size / stride);
const showShape = (s: Shape): string => `${s[0]}×${s[1]}×${s[2]} (c×h×w)`;

interface LayerCost {
  outShape: Shape;
  macs: number;
  params: number;
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

function convCost(layer: Extract<Layer, { op: 'conv' }>, inShape: Shape): LayerCost {
  const [cin, h, w] = inShape;
  const groups = layer.groups ?? 1;
  const stride = layer.stride ?? 1;
  if (cin % groups !== 0) throw new LayerProblem(`groups ${groups} does not divide the ${cin} input channels`, 'groups');
  if (layer.out % groups !== 0) throw new LayerProblem(`groups ${groups} does not divide the ${layer.out} output channels`, 'groups');
  const outShape: Shape = [layer.out, sameOut(h, stride), sameOut(w, stride)];
  const weights = layer.kernel * layer.kernel * (cin / groups) * layer.out;
  // Howard et al. 2017, eq. 2 generalised to groups: D_K²·(M/g)·N·D_F².
  return { outShape, macs: weights * outShape[1] * outShape[2], params: weights + (layer.bias ? layer.out : 0) };
}

function dwconvCost(layer: Extract<Layer, { op: 'dwconv' }>, inShape: Shape): LayerCost {
  const [c, h, w] = inShape;
  const stride = layer.stride ?? 1;
  const outShape: Shape = [c, sameOut(h, stride), sameOut(w, stride)];
  const weights = layer.kernel * layer.kernel * c;
  // Howard et al. 2017, eq. 5, depthwise term: D_K²·M·D_F².
  return { outShape, macs: weights * outShape[1] * outShape[2], params: weights + (layer.bias ? c : 0) };
}

function fcCost(layer: Extract<Layer, { op: 'fc' }>, inShape: Shape): LayerCost {
  const inputs = elements(inShape);
  const weights = inputs * layer.out;
  return { outShape: [layer.out, 1, 1], macs: weights, params: weights + ((layer.bias ?? true) ? layer.out : 0) };
}

function poolCost(layer: Extract<Layer, { op: 'maxpool' | 'avgpool' }>, inShape: Shape): LayerCost {
  const [c, h, w] = inShape;
  if (layer.global) return { outShape: [c, 1, 1], macs: 0, params: 0 };
  if (layer.kernel === undefined) throw new LayerProblem(`${layer.op} needs a kernel, or global: true`, 'kernel');
  const stride = layer.stride ?? layer.kernel;
  return { outShape: [c, sameOut(h, stride), sameOut(w, stride)], macs: 0, params: 0 };
}

function addCost(shapes: Shape[]): LayerCost {
  const [a, b] = shapes as [Shape, Shape];
  if (a[0] !== b[0] || a[1] !== b[1] || a[2] !== b[2]) {
    throw new LayerProblem(`add needs equal shapes, got ${showShape(a)} and ${showShape(b)}`, 'inputs');
  }
  return { outShape: [a[0], a[1], a[2]], macs: 0, params: 0 };
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

function layerInputRefs(layer: Layer): unknown[] | undefined {
  if (layer.op === 'add' || layer.op === 'concat') return Array.isArray(layer.inputs) ? layer.inputs : [];
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
    case 'maxpool':
    case 'avgpool':
      return poolCost(layer, first);
    case 'add':
      return addCost(shapes);
    case 'concat':
      return concatCost(shapes);
    default:
      throw new LayerProblem(`unknown op ${JSON.stringify((layer as { op: unknown }).op)}; expected one of ${LAYER_OPS.join(', ')}`, 'op');
  }
}

/**
 * Walk the layer list: each layer reads the previous one (the network input for the first layer)
 * unless `input` (or `inputs` for add/concat) names earlier layers by id. Ids default to the layer's index.
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
    const refField = layer.op === 'add' || layer.op === 'concat' ? 'inputs' : 'input';
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
    peak = Math.max(peak, inputElements + outputElements);
    shapeById.set(id, cost.outShape);
    indexById.set(id, i);
    previous = cost.outShape;
  });
  return { macs, params, peakActivationElements: peak, inputElements: elements(inputShape), layers };
}
