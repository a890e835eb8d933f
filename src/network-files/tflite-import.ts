/**
 * A TFLite file (flatbuffers, TFLite schema.fbs) to a network document, the same way the ONNX importer
 * works: one layer per operator that computes on the image, shapes inferred operator by operator in the
 * file's execution order, weights sized from the constant tensors (buffers). TFLite tensors are NHWC;
 * the document's shapes are c×h×w. Padding SAME/VALID maps to "same"/"valid"; a PAD feeding only one
 * VALID window operator (how converters write explicit padding) becomes that operator's explicit padding.
 * Fused activations become their own zero-MAC layer. Weight bytes are not counted from the file's element
 * type but from the model's precision, as for every network (int8 → 1 byte per parameter); the element
 * types found are reported in `weightStorage` so a float file can be told apart from a quantised one.
 * Anything else is an error naming the operator's index and op.
 */
import { InputError } from '../schema/issues.js';
import type { NetworkInput } from '../schema/network.js';
import { windowShape } from '../physics/network-window.js';
import type { Padding } from '../schema/network.js';
import { crossCheckShapes } from './cross-check.js';
import { FlatbufferDamage, type FbTable } from './flatbuffer-reader.js';
import { layerIdOf } from './layer-id.js';
import { NodeProblem, type LayerDraft } from './onnx-layers.js';
import type { ImportedNetwork, OnnxImportOptions } from './onnx-import.js';
import { ACTIVATION_OPS, chwOf, count, FUSED_LAYERS, paddingOf, sizeField } from './tflite-layer-kinds.js';
import { FIELDS, FUSED, OP, opName, PADDING } from './tflite-ops.js';
import { intValues, readTflite, TENSOR_TYPES, type TfliteModel, type TfliteOperator, type TfliteTensor } from './tflite-model.js';

export interface TfliteImported extends ImportedNetwork {
  /** Parameters of the MAC-carrying layers by the element type the file stores them in (int8, float32, float16…). */
  weightStorage: Record<string, number>;
}

interface Activation {
  /** NHWC ([1, H, W, C]) or [1, C] after a flatten or fully connected layer. */
  dims: number[];
  layer: string;
  /** A PAD not yet applied: [top, left, bottom, right], taken up by the VALID window op that reads it. */
  pendingPad?: [number, number, number, number];
}

const INPUT = '\u0000input';
function parse(bytes: Uint8Array, source: string): TfliteModel {
  try {
    return readTflite(bytes);
  } catch (e) {
    if (e instanceof FlatbufferDamage) {
      throw new InputError(`${source} is not a readable TFLite file: ${e.message}`, [{ path: '(file)', message: `flatbuffers reading failed: ${e.message}` }], source);
    }
    throw e;
  }
}

export function importTflite(bytes: Uint8Array, source: string, options: OnnxImportOptions = {}): TfliteImported {
  const model = parse(bytes, source);
  const fail = (path: string, message: string): never => {
    throw new InputError(`${source}: ${path}: ${message}`, [{ path, message }], source);
  };
  const { tensors, operators } = model;
  if (operators.length === 0) fail('subgraphs[0].operators', 'the model has no operators');
  const tensorAt = (i: number): TfliteTensor | undefined => (i >= 0 ? tensors[i] : undefined);

  const constants = new Map<number, TfliteTensor>();
  for (const t of tensors) if (t.data || t.external) constants.set(t.index, t);
  const graphInputs = model.inputs.filter((i) => !constants.has(i));
  if (graphInputs.length !== 1) fail('subgraphs[0].inputs', `the model takes ${graphInputs.length} inputs; only networks of one image input are imported`);
  const input = tensorAt(graphInputs[0]!) ?? fail('subgraphs[0].inputs[0]', `tensor ${graphInputs[0]} does not exist`);
  let dims: number[];
  if (options.inputShape) {
    const [n, c, h, w] = options.inputShape as [number, number, number, number];
    if (input.shape.length && input.shape.length !== 4) fail('subgraphs[0].inputs[0]', `input ${input.name} has ${input.shape.length} dimensions; --input-shape gives 4`);
    dims = [n, h, w, c];
  } else dims = input.shape;
  if (dims.length !== 4 || dims[0] !== 1 || dims.some((d) => d < 1)) {
    fail('subgraphs[0].inputs[0]', `input ${input.name} must be 1×H×W×C (one image, NHWC), got [${dims.join(', ')}]; give --input-shape N,C,H,W`);
  }

  const activations = new Map<number, Activation>([[input.index, { dims, layer: INPUT }]]);
  const consumers = new Map<number, number[]>();
  operators.forEach((o) => o.inputs.forEach((t) => t >= 0 && consumers.set(t, [...(consumers.get(t) ?? []), o.index])));
  const graphOutputs = new Set(model.outputs);
  const layers: LayerDraft[] = [];
  const usedIds = new Set<string>();
  const shapes = new Map<string, [number, number, number]>();
  const skipped = new Set<number>();
  const weightStorage: Record<string, number> = {};
  let last = INPUT;

  const store = (t: TfliteTensor | undefined) => {
    if (!t) return;
    const type = TENSOR_TYPES[t.type]?.name ?? `type ${t.type}`;
    weightStorage[type] = (weightStorage[type] ?? 0) + count(t.shape);
  };

  const emit = (op: TfliteOperator, layer: LayerDraft, sources: string[], outTensor: number, outDims: number[], idSuffix = ''): string => {
    const name = (tensors[outTensor]?.name ?? `op_${op.index}`) + idSuffix;
    let id = layerIdOf(name);
    for (let k = 2; usedIds.has(id); k++) id = layerIdOf(`${name}_${k}`);
    usedIds.add(id);
    if (sources.includes(INPUT) && (sources.length > 1 || last !== INPUT)) {
      throw new NodeProblem('it reads the network input after other layers; a layer list cannot express that');
    }
    const multi = layer.op === 'add' || layer.op === 'mul' || layer.op === 'concat';
    const draft = multi ? { id, ...layer, inputs: sources } : sources[0] === last ? { id, ...layer } : { id, input: sources[0]!, ...layer };
    layers.push(draft as LayerDraft);
    shapes.set(id, chwOf(outDims));
    activations.set(outTensor, { dims: outDims, layer: id });
    last = id;
    return id;
  };

  /** The op's layer, then its fused activation as a layer of its own. */
  const emitWithFused = (op: TfliteOperator, layer: LayerDraft, sources: string[], outDims: number[], fused: number) => {
    const out = op.outputs[0]!;
    if (fused === FUSED.SIGN_BIT || !(fused in FUSED_LAYERS)) throw new NodeProblem(`fused activation ${fused} is not supported`);
    const act = FUSED_LAYERS[fused];
    if (!act) return emit(op, layer, sources, out, outDims);
    const id = emit(op, layer, sources, out, outDims, '/pre-activation');
    return emit(op, { ...act }, [id], out, outDims);
  };

  const constantOf = (op: TfliteOperator, k: number, what: string): TfliteTensor => {
    const t = tensorAt(op.inputs[k] ?? -1);
    const c = t ? constants.get(t.index) : undefined;
    if (!c) throw new NodeProblem(`its ${what} (input ${k}) is not a constant tensor`);
    return c;
  };
  const optionalConstant = (op: TfliteOperator, k: number): TfliteTensor | undefined => {
    const i = op.inputs[k] ?? -1;
    return i >= 0 ? constants.get(i) : undefined;
  };

  const windowOp = (op: TfliteOperator, x: Activation, kernel: [number, number], stride: [number, number], dilation: [number, number], padCode: number) => {
    const [n, h, w] = [x.dims[0]!, x.dims[1]!, x.dims[2]!];
    let pad: Padding = paddingOf(padCode);
    if (x.pendingPad) {
      if (pad !== 'valid') throw new NodeProblem('a PAD before a SAME-padded window is not supported');
      pad = x.pendingPad;
    }
    const [oh, ow] = windowShape([h, w], kernel, stride, dilation, pad, false);
    if (oh < 1 || ow < 1) throw new NodeProblem(`the ${kernel.join('×')} window does not fit the ${h}×${w} input`);
    return { n, pad, oh, ow };
  };

  operators.forEach((op, i) => {
    if (skipped.has(i)) return;
    const where = `subgraphs[0].operators[${i}]`;
    const label = `operator ${i} (${opName(op.code, op.customCode)})`;
    try {
      if (op.code < 0) throw new NodeProblem(`custom op ${JSON.stringify(op.customCode ?? '')} is not supported`);
      const out = op.outputs[0];
      if (out === undefined || !tensorAt(out)) throw new NodeProblem('it has no output tensor');
      for (const t of op.inputs) if (t >= 0 && !tensorAt(t)) throw new NodeProblem(`its input tensor ${t} does not exist`);
      const isAct = op.inputs.map((t) => t >= 0 && activations.has(t));
      if (!isAct.some(Boolean)) {
        // Operators over constants only: a DEQUANTIZE of float16 or int8 weights yields a constant.
        if (op.code === OP.DEQUANTIZE || op.code === OP.CAST) {
          const src = constants.get(op.inputs[0] ?? -1);
          if (src) {
            constants.set(out, src);
            return;
          }
        }
        for (const t of op.inputs) if (t >= 0 && !constants.has(t)) throw new NodeProblem(`its input tensor ${t} (${JSON.stringify(tensors[t]!.name)}) is neither a constant nor computed by an earlier operator`);
        throw new NodeProblem(`${opName(op.code)} over constants cannot be computed by this importer`);
      }
      const x = activations.get(op.inputs[0]!);
      const o: FbTable | undefined = op.options;
      const act = (k: number) => activations.get(op.inputs[k]!)!;

      if (op.code === OP.ADD || op.code === OP.MUL || op.code === OP.SUB || op.code === OP.DIV) {
        const fused = o?.int8(FIELDS.ArithmeticOptions.fused_activation_function, 'fused_activation_function') ?? 0;
        if (isAct[0] && isAct[1]) {
          if (op.code === OP.SUB || op.code === OP.DIV) throw new NodeProblem(`${opName(op.code)} of two computed tensors is not supported`);
          const [a, b] = [act(0), act(1)];
          const outDims = count(a.dims) >= count(b.dims) ? a.dims : b.dims;
          emitWithFused(op, { op: op.code === OP.ADD ? 'add' : 'mul', inputs: [a.layer, b.layer] }, [a.layer, b.layer], outDims, fused);
          return;
        }
        const k = isAct[0] ? 0 : 1;
        const c = constantOf(op, 1 - k, 'operand');
        if (count(c.shape) > 1) throw new NodeProblem(`${opName(op.code)} with a constant of ${count(c.shape)} elements is not supported (only scalars)`);
        emitWithFused(op, { op: 'activation', fn: 'affine' }, [act(k).layer], act(k).dims, fused);
        return;
      }
      if (op.code === OP.CONCATENATION) {
        if (!isAct.every(Boolean)) throw new NodeProblem('CONCATENATION of computed tensors with constants is not supported');
        const ins = op.inputs.map((_, k) => act(k));
        const rank = ins[0]!.dims.length;
        const axis = o?.int32(FIELDS.ConcatenationOptions.axis, 'axis') ?? 0;
        if (rank !== 4 || (axis < 0 ? axis + rank : axis) !== 3) throw new NodeProblem(`CONCATENATION along axis ${axis} of rank-${rank} tensors is not supported (only the channel axis 3 of NHWC)`);
        const outDims = [...ins[0]!.dims];
        outDims[3] = ins.reduce((s, t) => s + t.dims[3]!, 0);
        const fused = o?.int8(FIELDS.ConcatenationOptions.fused_activation_function, 'fused_activation_function') ?? 0;
        emitWithFused(op, { op: 'concat', inputs: ins.map((t) => t.layer) }, ins.map((t) => t.layer), outDims, fused);
        return;
      }
      if (!x || !isAct[0]) throw new NodeProblem('its first input is a constant; only computed inputs are supported there');
      for (let k = 1; k < isAct.length; k++) if (isAct[k]) throw new NodeProblem(`its input ${k} is a computed tensor; only constants are supported there`);
      if (x.pendingPad && !(op.code === OP.CONV_2D || op.code === OP.DEPTHWISE_CONV_2D || op.code === OP.MAX_POOL_2D || op.code === OP.AVERAGE_POOL_2D)) {
        throw new NodeProblem('internal: a pending PAD reached an operator that cannot take it');
      }

      if (op.code in ACTIVATION_OPS) {
        if (op.code === OP.LOGISTIC) {
          const users = consumers.get(out) ?? [];
          const partner = users.length === 1 ? operators[users[0]!] : undefined;
          if (partner?.code === OP.MUL && partner.inputs.includes(op.inputs[0]!) && partner.inputs.includes(out)) {
            // x · sigmoid(x), as converters write SiLU/swish.
            skipped.add(partner.index);
            emit(partner, { op: 'activation', fn: 'swish' }, [x.layer], partner.outputs[0]!, x.dims);
            return;
          }
        }
        emit(op, { ...ACTIVATION_OPS[op.code]! }, [x.layer], out, x.dims);
        return;
      }
      switch (op.code) {
        case OP.CONV_2D:
        case OP.DEPTHWISE_CONV_2D: {
          if (x.dims.length !== 4) throw new NodeProblem(`needs a 4-D NHWC input, got [${x.dims.join(', ')}]`);
          const weight = constantOf(op, 1, 'weights');
          if (weight.shape.length !== 4) throw new NodeProblem(`weights have ${weight.shape.length} dimensions, not 4`);
          const bias = optionalConstant(op, 2);
          const cin = x.dims[3]!;
          const dw = op.code === OP.DEPTHWISE_CONV_2D;
          const F = dw ? FIELDS.DepthwiseConv2DOptions : FIELDS.Conv2DOptions;
          if (!o) throw new NodeProblem('it has no options (padding, strides)');
          const stride: [number, number] = [o.int32(F.stride_h, 'stride_h', 1), o.int32(F.stride_w, 'stride_w', 1)];
          const dilation: [number, number] = [o.int32(F.dilation_h_factor, 'dilation_h_factor', 1), o.int32(F.dilation_w_factor, 'dilation_w_factor', 1)];
          if (stride.some((s) => s < 1) || dilation.some((d) => d < 1)) throw new NodeProblem(`strides [${stride.join(', ')}] and dilations [${dilation.join(', ')}] must be at least 1`);
          // CONV_2D weights are [O, KH, KW, I]; DEPTHWISE_CONV_2D weights are [1, KH, KW, C·multiplier] (schema.fbs and the TFLite kernels' layout).
          const [w0, kh, kw, w3] = weight.shape as [number, number, number, number];
          const k: [number, number] = [kh, kw];
          const wnd = windowOp(op, x, k, stride, dilation, o.int8(F.padding, 'padding'));
          let out_ = w0;
          let groups = 1;
          if (dw) {
            if (w0 !== 1 || w3 % cin !== 0) throw new NodeProblem(`depthwise weights [${weight.shape.join(', ')}] do not fit ${cin} input channels`);
            out_ = w3;
            groups = cin;
          } else {
            if (cin % w3 !== 0) throw new NodeProblem(`weights [${weight.shape.join(', ')}] do not fit ${cin} input channels`);
            groups = cin / w3;
          }
          const common = {
            kernel: sizeField(k),
            stride: sizeField(stride),
            padding: wnd.pad,
            ...(dilation[0] !== 1 || dilation[1] !== 1 ? { dilation: sizeField(dilation) } : {}),
            bias: bias !== undefined,
          };
          const depthwise = groups === cin && out_ === cin && groups > 1;
          const layer: LayerDraft = depthwise ? { op: 'dwconv', ...common } : { op: 'conv', out: out_, groups, ...common };
          store(weight);
          store(bias);
          emitWithFused(op, layer, [x.layer], [wnd.n, wnd.oh, wnd.ow, out_], o.int8(F.fused_activation_function, 'fused_activation_function'));
          return;
        }
        case OP.AVERAGE_POOL_2D:
        case OP.MAX_POOL_2D: {
          if (x.dims.length !== 4) throw new NodeProblem(`needs a 4-D NHWC input, got [${x.dims.join(', ')}]`);
          if (!o) throw new NodeProblem('it has no options (filter size, strides)');
          const F = FIELDS.Pool2DOptions;
          const k: [number, number] = [o.int32(F.filter_height, 'filter_height'), o.int32(F.filter_width, 'filter_width')];
          const stride: [number, number] = [o.int32(F.stride_h, 'stride_h', 1), o.int32(F.stride_w, 'stride_w', 1)];
          if (k.some((v) => v < 1) || stride.some((s) => s < 1)) throw new NodeProblem(`filter [${k.join(', ')}] and strides [${stride.join(', ')}] must be at least 1`);
          const wnd = windowOp(op, x, k, stride, [1, 1], o.int8(F.padding, 'padding'));
          const layer: LayerDraft = { op: op.code === OP.MAX_POOL_2D ? 'maxpool' : 'avgpool', kernel: sizeField(k), stride: sizeField(stride), padding: wnd.pad };
          emitWithFused(op, layer, [x.layer], [wnd.n, wnd.oh, wnd.ow, x.dims[3]!], o.int8(F.fused_activation_function, 'fused_activation_function'));
          return;
        }
        case OP.MEAN:
        case OP.REDUCE_MAX: {
          const axes = intValues(constantOf(op, 1, 'axes'))?.map((a) => (a < 0 ? a + x.dims.length : a)).sort();
          if (x.dims.length !== 4 || !axes || axes.join(',') !== '1,2') throw new NodeProblem(`only a reduction over the spatial axes [1, 2] of an NHWC tensor is supported (a global pool), got axes [${axes?.join(', ') ?? '?'}]`);
          const keep = o?.bool(FIELDS.ReducerOptions.keep_dims, 'keep_dims') ?? false;
          const c = x.dims[3]!;
          emit(op, { op: op.code === OP.MEAN ? 'avgpool' : 'maxpool', global: true }, [x.layer], out, keep ? [1, 1, 1, c] : [1, c]);
          return;
        }
        case OP.FULLY_CONNECTED: {
          const weight = constantOf(op, 1, 'weights');
          if (weight.shape.length !== 2) throw new NodeProblem(`weights have shape [${weight.shape.join(', ')}]; FULLY_CONNECTED weights are [out, in]`);
          const [outF, inF] = weight.shape as [number, number];
          const bias = optionalConstant(op, 2);
          const F = FIELDS.FullyConnectedOptions;
          const keep = o?.bool(F.keep_num_dims, 'keep_num_dims') ?? false;
          const fused = o?.int8(F.fused_activation_function, 'fused_activation_function') ?? 0;
          if ((o?.int8(F.weights_format, 'weights_format') ?? 0) !== 0) throw new NodeProblem('shuffled weight formats are not supported');
          store(weight);
          store(bias);
          const last_ = x.dims.at(-1)!;
          if (keep && x.dims.length === 4 && x.dims[1]! * x.dims[2]! > 1) {
            if (last_ !== inF) throw new NodeProblem(`weights [${weight.shape.join(', ')}] do not fit the ${last_} input channels`);
            emitWithFused(op, { op: 'matmul', out: outF, ...(bias ? { bias: true } : {}) }, [x.layer], [x.dims[0]!, x.dims[1]!, x.dims[2]!, outF], fused);
            return;
          }
          // Without keep_num_dims the input is flattened to [batch, in] (TFLite FULLY_CONNECTED semantics).
          if (count(x.dims) !== inF) throw new NodeProblem(`weights [${weight.shape.join(', ')}] do not fit the ${count(x.dims)} input features of [${x.dims.join(', ')}]`);
          emitWithFused(op, { op: 'fc', out: outF, bias: bias !== undefined }, [x.layer], keep && x.dims.length === 4 ? [1, 1, 1, outF] : [1, outF], fused);
          return;
        }
        case OP.RESHAPE:
        case OP.SQUEEZE:
        case OP.EXPAND_DIMS: {
          let target: number[] = tensors[out]!.shape;
          if (op.code === OP.RESHAPE) {
            const given = optionalConstant(op, 1);
            const raw = (given && intValues(given)) ?? o?.int32s(FIELDS.ReshapeOptions.new_shape, 'new_shape') ?? target;
            const known = raw.filter((d) => d !== -1).reduce((p, d) => p * d, 1);
            target = raw.map((d) => (d === -1 ? count(x.dims) / known : d));
          }
          if ( target.some((d) => !Number.isInteger(d) || d < 1) || count(target) !== count(x.dims)) {
            throw new NodeProblem(`shape [${target.join(', ')}] cannot reshape [${x.dims.join(', ')}]`);
          }
          if (target[0] !== 1) throw new NodeProblem(`a reshape that changes the batch dimension (${x.dims[0]} → ${target[0]}) is not supported`);
          if (target.length === 2) {
            if (x.dims.length === 2) activations.set(out, { dims: target, layer: x.layer });
            else emit(op, { op: 'flatten' }, [x.layer], out, target);
            return;
          }
          if (target.length !== 4) throw new NodeProblem(`reshape to rank ${target.length} is not supported (only [1, H, W, C] and [1, N])`);
          const from = chwOf(x.dims);
          const to = chwOf(target);
          if (from.every((d, k) => d === to[k])) activations.set(out, { dims: target, layer: x.layer });
          else emit(op, { op: 'reshape', shape: to }, [x.layer], out, target);
          return;
        }
        case OP.PAD:
        case OP.PADV2: {
          const pads = intValues(constantOf(op, 1, 'paddings'));
          if (x.dims.length !== 4 || !pads || pads.length !== 8) throw new NodeProblem('paddings must be a constant [4, 2] for an NHWC input');
          if (pads[0] || pads[1] || pads[6] || pads[7]) throw new NodeProblem('padding of the batch or channel axis is not supported');
          const [t, b, l, r] = [pads[2]!, pads[3]!, pads[4]!, pads[5]!];
          const users = consumers.get(out) ?? [];
          const user = users.length === 1 && !graphOutputs.has(out) ? operators[users[0]!] : undefined;
          const userPadding = user?.options?.int8(0, 'padding');
          const windowUser = user && (user.code === OP.CONV_2D || user.code === OP.DEPTHWISE_CONV_2D || user.code === OP.MAX_POOL_2D || user.code === OP.AVERAGE_POOL_2D);
          if (windowUser && userPadding === PADDING.VALID && user.inputs[0] === out && !x.pendingPad) {
            activations.set(out, { dims: x.dims, layer: x.layer, pendingPad: [t, l, b, r] });
            return;
          }
          emit(op, { op: 'pad', pads: [t, l, b, r] }, [x.layer], out, [x.dims[0]!, x.dims[1]! + t + b, x.dims[2]! + l + r, x.dims[3]!]);
          return;
        }
        case OP.RESIZE_BILINEAR:
        case OP.RESIZE_NEAREST_NEIGHBOR: {
          const size = intValues(constantOf(op, 1, 'size'));
          if (x.dims.length !== 4 || !size || size.length !== 2 || size.some((d) => d < 1)) throw new NodeProblem('size must be a constant of 2 positive values for an NHWC input');
          emit(op, { op: 'resize', size: [size[0]!, size[1]!] }, [x.layer], out, [x.dims[0]!, size[0]!, size[1]!, x.dims[3]!]);
          return;
        }
        case OP.QUANTIZE:
        case OP.DEQUANTIZE:
        case OP.CAST:
          activations.set(out, { dims: x.dims, layer: x.layer });
          return;
        default:
          throw new NodeProblem(`op ${opName(op.code)} is not supported`);
      }
    } catch (e) {
      if (e instanceof NodeProblem) fail(where, `${label}: ${e.message}`);
      if (e instanceof FlatbufferDamage) fail(where, `${label}: ${e.message}`);
      throw e;
    }
  });

  if (layers.length === 0) fail('subgraphs[0].operators', 'no operator computes on the input');
  const network: NetworkInput = {
    kind: 'network',
    ...(options.id ? { id: options.id } : {}),
    name: options.name ?? (model.subgraphName || 'imported network'),
    input: { channels: dims[3]!, height: dims[1]!, width: dims[2]! },
    layers,
  };
  crossCheckShapes(network, shapes, source, 'TFLite');
  const tensorDims = new Map<string, number[]>();
  for (const [t, a] of activations) {
    // A PAD taken up by the next window op still has its padded shape in the file.
    const p = a.pendingPad;
    tensorDims.set(tensors[t]!.name, p ? [a.dims[0]!, a.dims[1]! + p[0] + p[2], a.dims[2]! + p[1] + p[3], a.dims[3]!] : a.dims);
  }
  return {
    network,
    tensorDims,
    inputName: input.name,
    outputNames: model.outputs.map((t) => tensors[t]?.name ?? `tensor_${t}`),
    opsetVersion: model.version,
    weightStorage,
  };
}
