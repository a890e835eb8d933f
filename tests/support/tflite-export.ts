import { Builder } from 'flatbuffers';
import { FIELDS, OP, OPTIONS_TYPE, PADDING } from '../../src/network-files/tflite-ops.js';
import { analyzeNetwork } from '../../src/physics/network-cost.js';
import type { Layer, Network } from '../../src/schema/index.js';

/**
 * Writes a layer list as a TFLite file with the flatbuffers builder, table for table as TFLite's schema.fbs
 * lays them out (Model → SubGraph → Tensor/Operator, OperatorCode, Buffer; file identifier "TFL3"), the way
 * a converter writes a vision model: NHWC tensors, weights [O, KH, KW, I] (depthwise [1, KH, KW, C]),
 * explicit padding as a PAD before a VALID window, global pooling as MEAN over axes [1, 2], flatten as a
 * RESHAPE, swish as LOGISTIC + MUL, batch norm folded away (as converters do), weights in buffers.
 */
export interface TfliteExportOptions {
  /**
   * Element type of the weights: float32 (default), int8 (per-tensor quantised; biases int32), or float16
   * behind a DEQUANTIZE op to float32, as the float16 post-training quantisation writes them.
   */
  weights?: 'float32' | 'int8' | 'float16';
  /** Put QUANTIZE after the input and DEQUANTIZE before the output, as fully quantised files do. */
  quantizeIo?: boolean;
  /** Fold relu/relu6 layers into the preceding conv, depthwise conv or fully connected op. */
  fuseActivations?: boolean;
  /** Change the written operators, e.g. to write one the importer does not know. */
  editOps?: (ops: OpSpec[]) => void;
}

const TYPE = { FLOAT32: 0, FLOAT16: 1, INT32: 2, INT8: 9 } as const;
const pair = (v: number | [number, number] | undefined, fallback: number): [number, number] => (v === undefined ? [fallback, fallback] : typeof v === 'number' ? [v, v] : v);

interface TensorSpec {
  name: string;
  shape: number[];
  type: number;
  data?: Uint8Array;
}
export interface OpSpec {
  /** BuiltinOperator code; 32 (CUSTOM) with customCode for a custom op. */
  code: number;
  customCode?: string;
  inputs: number[];
  outputs: number[];
  optionsType?: number;
  options?: (b: Builder) => number;
}

const FUSE: Record<string, number> = { relu: 1, relu6: 3 };

export function exportTflite(network: Network, options: TfliteExportOptions = {}): Uint8Array {
  const analysis = analyzeNetwork(network);
  const tensors: TensorSpec[] = [];
  const ops: OpSpec[] = [];
  const byId = new Map<string, number>();
  const weightType = options.weights === 'int8' ? TYPE.INT8 : options.weights === 'float16' ? TYPE.FLOAT16 : TYPE.FLOAT32;
  /** A weight tensor; float16 ones are read through a DEQUANTIZE to float32 written just before their use. */
  const weightTensor = (name: string, shape: number[]): number => {
    const stored = constant(name, shape, weightType);
    if (weightType !== TYPE.FLOAT16) return stored;
    const f32 = tensor({ name: `${name}/dequantized`, shape, type: TYPE.FLOAT32 });
    ops.push({ code: OP.DEQUANTIZE, inputs: [stored], outputs: [f32] });
    return f32;
  };
  const tensor = (t: TensorSpec): number => tensors.push(t) - 1;
  const constant = (name: string, shape: number[], type: number, values?: number[]): number => {
    const n = shape.reduce((a, b) => a * b, 1);
    const size = type === TYPE.FLOAT32 || type === TYPE.INT32 ? 4 : type === TYPE.FLOAT16 ? 2 : 1;
    const data = new Uint8Array(Math.max(1, n) * size);
    if (values) {
      const view = new DataView(data.buffer);
      values.forEach((v, i) => (type === TYPE.INT32 ? view.setInt32(4 * i, v, true) : view.setFloat32(4 * i, v, true)));
    }
    return tensor({ name, shape, type, data });
  };
  const ints = (name: string, values: number[], shape = [values.length]) => constant(name, shape, TYPE.INT32, values);
  const nhwc = (chw: readonly number[]) => [1, chw[1]!, chw[2]!, chw[0]!];
  const activationType = options.weights === 'int8' ? TYPE.INT8 : TYPE.FLOAT32;

  let x = tensor({ name: 'input', shape: [1, network.input.height, network.input.width, network.input.channels], type: TYPE.FLOAT32 });
  const inputTensor = x;
  if (options.quantizeIo) {
    const q = tensor({ name: 'input/quantized', shape: tensors[x]!.shape, type: TYPE.INT8 });
    ops.push({ code: OP.QUANTIZE, inputs: [x], outputs: [q] });
    x = q;
  }
  byId.set('input', x);
  let previous = x;
  const rank = new Map<number, number>([[x, 4]]);

  const windowOptions = (padding: number, stride: [number, number], extra: (b: Builder) => void) => (b: Builder) => {
    b.startObject(8);
    b.addFieldInt8(0, padding, 0);
    b.addFieldInt32(1, stride[1], 0);
    b.addFieldInt32(2, stride[0], 0);
    extra(b);
    return b.endObject();
  };
  /** Explicit padding becomes PAD + VALID; "same" stays SAME; "valid" stays VALID. */
  const padded = (layer: Extract<Layer, { op: 'conv' | 'dwconv' | 'maxpool' | 'avgpool' }>, src: number, id: string): [number, number] => {
    const p = layer.padding ?? 'same';
    if (p === 'same') return [src, PADDING.SAME];
    if (p === 'valid') return [src, PADDING.VALID];
    const [t, l, bo, r] = p;
    const inShape = tensors[src]!.shape;
    const out = tensor({ name: `${id}/pad`, shape: [1, inShape[1]! + t + bo, inShape[2]! + l + r, inShape[3]!], type: activationType });
    ops.push({ code: OP.PAD, inputs: [src, ints(`${id}/paddings`, [0, 0, t, bo, l, r, 0, 0], [4, 2])], outputs: [out], optionsType: OPTIONS_TYPE.PadOptions, options: (b) => (b.startObject(0), b.endObject()) });
    return [out, PADDING.VALID];
  };

  const layers = network.layers;
  for (let i = 0; i < layers.length; i++) {
    const layer = layers[i]!;
    const a = analysis.layers[i]!;
    const id = a.id;
    const srcIds = 'inputs' in layer ? layer.inputs.map(String) : layer.input === undefined ? undefined : [String(layer.input)];
    const srcs = srcIds ? srcIds.map((s) => byId.get(s)!) : [previous];
    const src = srcs[0]!;
    const outShape = (rank.get(src) === 2 && (layer.op === 'activation' || layer.op === 'add' || layer.op === 'mul')) ? [1, a.outShape[0]] : nhwc(a.outShape);
    const next = layers[i + 1];
    const fuse = options.fuseActivations && next?.op === 'activation' && next.fn in FUSE && next.input === undefined && (layer.op === 'conv' || layer.op === 'dwconv' || layer.op === 'fc') ? FUSE[next.fn]! : 0;
    const outName = fuse ? String(analysis.layers[i + 1]!.id) : id;
    const out = () => tensor({ name: outName, shape: outShape, type: activationType });
    let result: number;
    switch (layer.op) {
      case 'conv':
      case 'dwconv': {
        const [k, stride, dil] = [pair(layer.kernel, 1), pair(layer.stride, 1), pair(layer.dilation, 1)];
        const cin = a.inShape[0];
        const [inT, padding] = padded(layer, src, id);
        const dw = layer.op === 'dwconv';
        const oc = dw ? cin : layer.out;
        const w = weightTensor(`${id}/weights`, dw ? [1, k[0], k[1], cin] : [oc, k[0], k[1], cin / (layer.groups ?? 1)]);
        const inputs = [inT, w];
        if (layer.bias) inputs.push(constant(`${id}/bias`, [oc], options.weights === 'int8' ? TYPE.INT32 : TYPE.FLOAT32));
        else inputs.push(-1);
        result = out();
        ops.push({
          code: dw ? OP.DEPTHWISE_CONV_2D : OP.CONV_2D,
          inputs,
          outputs: [result],
          optionsType: dw ? OPTIONS_TYPE.DepthwiseConv2DOptions : OPTIONS_TYPE.Conv2DOptions,
          options: windowOptions(padding, stride, (b) => {
            const F = dw ? FIELDS.DepthwiseConv2DOptions : FIELDS.Conv2DOptions;
            if (dw) b.addFieldInt32(FIELDS.DepthwiseConv2DOptions.depth_multiplier, 1, 0);
            b.addFieldInt8(F.fused_activation_function, fuse, 0);
            b.addFieldInt32(F.dilation_w_factor, dil[1], 1);
            b.addFieldInt32(F.dilation_h_factor, dil[0], 1);
          }),
        });
        break;
      }
      case 'fc': {
        const kIn = a.inShape[0] * a.inShape[1] * a.inShape[2];
        const inputs = [src, weightTensor(`${id}/weights`, [layer.out, kIn])];
        inputs.push(layer.bias ?? true ? constant(`${id}/bias`, [layer.out], options.weights === 'int8' ? TYPE.INT32 : TYPE.FLOAT32) : -1);
        result = tensor({ name: outName, shape: [1, layer.out], type: activationType });
        ops.push({ code: OP.FULLY_CONNECTED, inputs, outputs: [result], optionsType: OPTIONS_TYPE.FullyConnectedOptions, options: (b) => (b.startObject(4), b.addFieldInt8(FIELDS.FullyConnectedOptions.fused_activation_function, fuse, 0), b.endObject()) });
        rank.set(result, 2);
        break;
      }
      case 'maxpool':
      case 'avgpool': {
        if (layer.global) {
          result = out();
          ops.push({ code: layer.op === 'avgpool' ? OP.MEAN : OP.REDUCE_MAX, inputs: [src, ints(`${id}/axes`, [1, 2])], outputs: [result], optionsType: OPTIONS_TYPE.ReducerOptions, options: (b) => (b.startObject(1), b.addFieldInt8(0, 1, 0), b.endObject()) });
          break;
        }
        if (layer.ceil) throw new Error(`layer ${id}: TFLite pooling has no ceil mode`);
        const k = pair(layer.kernel, 1);
        const stride = pair(layer.stride ?? layer.kernel, 1);
        const [inT, padding] = padded(layer, src, id);
        result = out();
        ops.push({
          code: layer.op === 'avgpool' ? OP.AVERAGE_POOL_2D : OP.MAX_POOL_2D,
          inputs: [inT],
          outputs: [result],
          optionsType: OPTIONS_TYPE.Pool2DOptions,
          options: windowOptions(padding, stride, (b) => {
            b.addFieldInt32(FIELDS.Pool2DOptions.filter_width, k[1], 0);
            b.addFieldInt32(FIELDS.Pool2DOptions.filter_height, k[0], 0);
          }),
        });
        break;
      }
      case 'add':
      case 'mul':
        result = out();
        ops.push({ code: layer.op === 'add' ? OP.ADD : OP.MUL, inputs: srcs, outputs: [result], optionsType: layer.op === 'add' ? OPTIONS_TYPE.AddOptions : OPTIONS_TYPE.MulOptions, options: (b) => (b.startObject(2), b.endObject()) });
        break;
      case 'concat':
        result = out();
        ops.push({ code: OP.CONCATENATION, inputs: srcs, outputs: [result], optionsType: OPTIONS_TYPE.ConcatenationOptions, options: (b) => (b.startObject(2), b.addFieldInt32(0, 3, 0), b.endObject()) });
        break;
      case 'activation': {
        const simple: Record<string, number> = { relu: OP.RELU, relu6: OP.RELU6, sigmoid: OP.LOGISTIC, tanh: OP.TANH, 'hard-swish': OP.HARD_SWISH, 'leaky-relu': OP.LEAKY_RELU, gelu: OP.GELU, softmax: OP.SOFTMAX, clip: OP.RELU_N1_TO_1 };
        result = out();
        if (layer.fn === 'swish') {
          const sig = tensor({ name: `${id}/sigmoid`, shape: outShape, type: activationType });
          ops.push({ code: OP.LOGISTIC, inputs: [src], outputs: [sig] });
          ops.push({ code: OP.MUL, inputs: [src, sig], outputs: [result], optionsType: OPTIONS_TYPE.MulOptions, options: (b) => (b.startObject(1), b.endObject()) });
        } else if (layer.fn === 'affine') {
          ops.push({ code: OP.MUL, inputs: [src, constant(`${id}/scale`, [], TYPE.FLOAT32, [1])], outputs: [result], optionsType: OPTIONS_TYPE.MulOptions, options: (b) => (b.startObject(1), b.endObject()) });
        } else if (simple[layer.fn] !== undefined) ops.push({ code: simple[layer.fn]!, inputs: [src], outputs: [result] });
        else throw new Error(`layer ${id}: no TFLite op for activation ${layer.fn}`);
        break;
      }
      case 'batchnorm':
        // Converters fold batch norm into the convolution before it: nothing is written.
        byId.set(id, src);
        previous = src;
        continue;
      case 'flatten':
      case 'reshape': {
        const shape = layer.op === 'flatten' ? [1, a.outShape[0] * a.outShape[1] * a.outShape[2]] : nhwc(a.outShape);
        result = tensor({ name: id, shape, type: activationType });
        ops.push({ code: OP.RESHAPE, inputs: [src, ints(`${id}/shape`, shape)], outputs: [result], optionsType: OPTIONS_TYPE.ReshapeOptions, options: (b) => (b.startObject(1), b.endObject()) });
        rank.set(result, shape.length);
        break;
      }
      case 'pad': {
        const [t, l, bo, r] = layer.pads;
        result = out();
        ops.push({ code: OP.PAD, inputs: [src, ints(`${id}/paddings`, [0, 0, t, bo, l, r, 0, 0], [4, 2])], outputs: [result] });
        break;
      }
      case 'resize':
        result = out();
        ops.push({ code: OP.RESIZE_BILINEAR, inputs: [src, ints(`${id}/size`, [a.outShape[1], a.outShape[2]])], outputs: [result], optionsType: OPTIONS_TYPE.ResizeBilinearOptions, options: (b) => (b.startObject(4), b.endObject()) });
        break;
      default:
        throw new Error(`layer ${id}: op ${layer.op} has no TFLite writing here`);
    }
    if (!rank.has(result)) rank.set(result, tensors[result]!.shape.length);
    byId.set(id, result);
    previous = result;
    if (fuse) {
      byId.set(String(analysis.layers[i + 1]!.id), result);
      i++;
    }
  }
  let output = previous;
  if (options.quantizeIo) {
    const d = tensor({ name: 'output/dequantized', shape: tensors[output]!.shape, type: TYPE.FLOAT32 });
    ops.push({ code: OP.DEQUANTIZE, inputs: [output], outputs: [d] });
    output = d;
  }
  options.editOps?.(ops);
  return build(network.name, tensors, ops, [inputTensor], [output]);
}

function int32Vector(b: Builder, values: number[]): number {
  b.startVector(4, values.length, 4);
  for (let i = values.length - 1; i >= 0; i--) b.addInt32(values[i]!);
  return b.endVector();
}
function offsetVector(b: Builder, offsets: number[]): number {
  b.startVector(4, offsets.length, 4);
  for (let i = offsets.length - 1; i >= 0; i--) b.addOffset(offsets[i]!);
  return b.endVector();
}

/** Model tables in schema.fbs field order (ids in the comments). */
function build(name: string, tensors: TensorSpec[], ops: OpSpec[], inputs: number[], outputs: number[]): Uint8Array {
  const size = tensors.reduce((s, t) => s + (t.data?.length ?? 0), 0) + 65_536;
  const b = new Builder(size);
  const keyOf = (o: OpSpec) => `${o.code}:${o.customCode ?? ''}`;
  const keys = [...new Set(ops.map(keyOf))];
  const opcodeOffsets = keys.map((key) => {
    const c = Number(key.split(':')[0]);
    const custom = key.slice(key.indexOf(':') + 1);
    const customOffset = custom ? b.createString(custom) : 0;
    b.startObject(4);
    if (customOffset) b.addFieldOffset(1, customOffset, 0); // custom_code
    b.addFieldInt8(0, Math.min(c, 127), 0); // deprecated_builtin_code
    b.addFieldInt32(2, 1, 1); // version
    b.addFieldInt32(3, c, 0); // builtin_code
    return b.endObject();
  });
  // Buffer 0 is the empty sentinel; each constant gets its own buffer.
  const bufferOffsets: number[] = [];
  b.startObject(3);
  bufferOffsets.push(b.endObject());
  const bufferOf = new Map<number, number>();
  tensors.forEach((t, i) => {
    if (!t.data) return;
    const data = b.createByteVector(t.data);
    b.startObject(3);
    b.addFieldOffset(0, data, 0);
    bufferOf.set(i, bufferOffsets.push(b.endObject()) - 1);
  });
  const tensorOffsets = tensors.map((t, i) => {
    const shape = int32Vector(b, t.shape);
    const tname = b.createString(t.name);
    b.startObject(9);
    b.addFieldOffset(0, shape, 0);
    b.addFieldInt8(1, t.type, 0);
    b.addFieldInt32(2, bufferOf.get(i) ?? 0, 0);
    b.addFieldOffset(3, tname, 0);
    return b.endObject();
  });
  const opOffsets = ops.map((o) => {
    const ins = int32Vector(b, o.inputs);
    const outs = int32Vector(b, o.outputs);
    const opts = o.options?.(b);
    b.startObject(6);
    b.addFieldInt32(0, keys.indexOf(keyOf(o)), 0);
    b.addFieldOffset(1, ins, 0);
    b.addFieldOffset(2, outs, 0);
    if (opts !== undefined) {
      b.addFieldInt8(3, o.optionsType ?? 0, 0);
      b.addFieldOffset(4, opts, 0);
    }
    return b.endObject();
  });
  const tensorsVec = offsetVector(b, tensorOffsets);
  const inputsVec = int32Vector(b, inputs);
  const outputsVec = int32Vector(b, outputs);
  const opsVec = offsetVector(b, opOffsets);
  const sgName = b.createString(name);
  b.startObject(5);
  b.addFieldOffset(0, tensorsVec, 0);
  b.addFieldOffset(1, inputsVec, 0);
  b.addFieldOffset(2, outputsVec, 0);
  b.addFieldOffset(3, opsVec, 0);
  b.addFieldOffset(4, sgName, 0);
  const subgraph = b.endObject();
  const codesVec = offsetVector(b, opcodeOffsets);
  const subgraphsVec = offsetVector(b, [subgraph]);
  const description = b.createString('written by the Ocellus test suite');
  const buffersVec = offsetVector(b, bufferOffsets);
  b.startObject(8);
  b.addFieldInt32(0, 3, 0); // version
  b.addFieldOffset(1, codesVec, 0);
  b.addFieldOffset(2, subgraphsVec, 0);
  b.addFieldOffset(3, description, 0);
  b.addFieldOffset(4, buffersVec, 0);
  const model = b.endObject();
  b.finish(model, 'TFL3');
  return b.asUint8Array();
}
