import type { onnx } from 'onnx-proto';
import { onnxProto } from '../../src/network-files/onnx-proto.js';
import { analyzeNetwork } from '../../src/physics/network-cost.js';
import type { Layer, Network } from '../../src/schema/index.js';

/**
 * Writes a layer list as an ONNX model (opset 13) with the same protobuf definitions the importer reads,
 * node for node the way training frameworks export: Conv/Gemm/MatMul with constant weights,
 * BatchNormalization, swish as Sigmoid + Mul, flatten optionally as Shape → Slice → Concat → Reshape.
 */
export interface ExportOptions {
  /** Weights as initializers (default) or as Constant nodes, as some exporters write them. */
  weightsAs?: 'initializer' | 'constant';
  /** Write flatten as the shape computation x.view(x.size(0), -1) exports to. */
  dynamicFlatten?: boolean;
  /** Values of a weight tensor; zeros when not given. */
  weightValues?: (layerId: string, role: 'weight' | 'bias' | 'scale' | 'shift' | 'mean' | 'var', dims: number[]) => Float32Array | undefined;
}

const FLOAT = onnxProto.TensorProto.DataType.FLOAT;
const INT64 = onnxProto.TensorProto.DataType.INT64;

function floatTensor(name: string, dims: number[], data: Float32Array): onnx.ITensorProto {
  return { name, dims, dataType: FLOAT, rawData: new Uint8Array(data.buffer, data.byteOffset, data.byteLength) };
}
function int64Tensor(name: string, values: number[]): onnx.ITensorProto {
  const raw = new Uint8Array(values.length * 8);
  const view = new DataView(raw.buffer);
  values.forEach((v, i) => view.setBigInt64(i * 8, BigInt(v), true));
  return { name, dims: [values.length], dataType: INT64, rawData: raw };
}
const ints = (name: string, values: number[]): onnx.IAttributeProto => ({ name, ints: values, type: onnxProto.AttributeProto.AttributeType.INTS });
const int = (name: string, value: number): onnx.IAttributeProto => ({ name, i: value, type: onnxProto.AttributeProto.AttributeType.INT });
const str = (name: string, value: string): onnx.IAttributeProto => ({ name, s: new TextEncoder().encode(value), type: onnxProto.AttributeProto.AttributeType.STRING });
const pair = (v: number | [number, number] | undefined, fallback: number): [number, number] => (v === undefined ? [fallback, fallback] : typeof v === 'number' ? [v, v] : v);

function windowAttrs(layer: Extract<Layer, { op: 'conv' | 'dwconv' | 'maxpool' | 'avgpool' }>, kernel: [number, number]): onnx.IAttributeProto[] {
  const stride = pair(layer.stride ?? (layer.op === 'maxpool' || layer.op === 'avgpool' ? layer.kernel : 1), 1);
  const attrs = [ints('kernel_shape', kernel), ints('strides', stride)];
  const p = layer.padding ?? 'same';
  if (p === 'same') attrs.push(str('auto_pad', 'SAME_UPPER'));
  else if (p === 'valid') attrs.push(str('auto_pad', 'VALID'));
  else attrs.push(ints('pads', [...p]));
  if ((layer.op === 'conv' || layer.op === 'dwconv') && layer.dilation !== undefined) attrs.push(ints('dilations', pair(layer.dilation, 1)));
  if ((layer.op === 'maxpool' || layer.op === 'avgpool') && layer.ceil) attrs.push(int('ceil_mode', 1));
  return attrs;
}

const ACT_OPS: Record<string, string> = { relu: 'Relu', sigmoid: 'Sigmoid', 'hard-sigmoid': 'HardSigmoid', 'hard-swish': 'HardSwish', tanh: 'Tanh', 'leaky-relu': 'LeakyRelu', gelu: 'Gelu', softmax: 'Softmax' };

export function exportOnnx(network: Network, options: ExportOptions = {}): Uint8Array {
  const analysis = analyzeNetwork(network);
  const nodes: onnx.INodeProto[] = [];
  const initializers: onnx.ITensorProto[] = [];
  const rank = new Map<string, number>([['input', 4]]);
  const addConst = (t: onnx.ITensorProto) => {
    if (options.weightsAs === 'constant') nodes.push({ name: `${t.name}_const`, opType: 'Constant', output: [t.name!], attribute: [{ name: 'value', t, type: onnxProto.AttributeProto.AttributeType.TENSOR }] });
    else initializers.push(t);
    return t.name!;
  };
  const weight = (layerId: string, role: Parameters<NonNullable<ExportOptions['weightValues']>>[1], dims: number[], fill = 0) => {
    const count = dims.reduce((a, b) => a * b, 1);
    const data = options.weightValues?.(layerId, role, dims) ?? new Float32Array(count).fill(fill);
    return addConst(floatTensor(`${layerId}.${role}`, dims, data));
  };
  const scalar = (name: string, v: number) => addConst(floatTensor(name, [], new Float32Array([v])));
  let previous = 'input';

  network.layers.forEach((layer, i) => {
    const a = analysis.layers[i]!;
    const id = a.id;
    const src = 'inputs' in layer ? layer.inputs.map(String) : [layer.input === undefined ? previous : String(layer.input)];
    const x = src[0]!;
    const node = (opType: string, input: string[], attribute: onnx.IAttributeProto[] = [], output = id, name = id) => nodes.push({ name, opType, input, output: [output], attribute });
    const cin = a.inShape[0];
    let outRank = rank.get(x) ?? 4;
    switch (layer.op) {
      case 'conv':
      case 'dwconv': {
        const k = pair(layer.kernel, 1);
        const out = layer.op === 'conv' ? layer.out : cin;
        const groups = layer.op === 'conv' ? (layer.groups ?? 1) : cin;
        const inputs = [x, weight(id, 'weight', [out, cin / groups, k[0], k[1]])];
        if (layer.bias) inputs.push(weight(id, 'bias', [out]));
        node('Conv', inputs, [...windowAttrs(layer, k), int('group', groups)]);
        break;
      }
      case 'fc': {
        if ((rank.get(x) ?? 4) !== 2) throw new Error(`layer ${id}: fc after a 4-D tensor; put a flatten layer before it`);
        const k = a.inShape[0] * a.inShape[1] * a.inShape[2];
        const inputs = [x, weight(id, 'weight', [layer.out, k])];
        if (layer.bias ?? true) inputs.push(weight(id, 'bias', [layer.out]));
        node('Gemm', inputs, [int('transB', 1)]);
        break;
      }
      case 'matmul': {
        if ((rank.get(x) ?? 4) !== 2) throw new Error(`layer ${id}: matmul needs a flattened input`);
        if (layer.bias) {
          node('MatMul', [x, weight(id, 'weight', [a.inShape[0], layer.out])], [], `${id}_mm`, `${id}_mm`);
          node('Add', [`${id}_mm`, weight(id, 'bias', [layer.out])], [], id, id);
          nodes.at(-2)!.name = id;
          nodes.at(-1)!.name = `${id}_bias`;
        } else node('MatMul', [x, weight(id, 'weight', [a.inShape[0], layer.out])]);
        break;
      }
      case 'maxpool':
      case 'avgpool':
        if (layer.global) node(layer.op === 'maxpool' ? 'GlobalMaxPool' : 'GlobalAveragePool', [x]);
        else node(layer.op === 'maxpool' ? 'MaxPool' : 'AveragePool', [x], windowAttrs(layer, pair(layer.kernel, 1)));
        break;
      case 'add':
        node('Add', src);
        break;
      case 'mul':
        node('Mul', src);
        break;
      case 'concat':
        node('Concat', src, [int('axis', 1)]);
        break;
      case 'activation':
        if (layer.fn === 'swish') {
          node('Sigmoid', [x], [], `${id}_sigmoid`, id);
          node('Mul', [x, `${id}_sigmoid`], [], id, `${id}_mul`);
        } else if (layer.fn === 'relu6' || layer.fn === 'clip') node('Clip', [x, scalar(`${id}.min`, 0), scalar(`${id}.max`, layer.fn === 'relu6' ? 6 : 1)]);
        else if (layer.fn === 'affine') node('Mul', [x, scalar(`${id}.a`, 1)]);
        else node(ACT_OPS[layer.fn]!, [x], layer.fn === 'softmax' ? [int('axis', 1)] : []);
        break;
      case 'batchnorm':
        node('BatchNormalization', [x, weight(id, 'scale', [cin], 1), weight(id, 'shift', [cin]), weight(id, 'mean', [cin]), weight(id, 'var', [cin], 1)]);
        break;
      case 'flatten':
        if (options.dynamicFlatten) {
          const c = (n: string, v: number[]) => addConst(int64Tensor(`${id}.${n}`, v));
          node('Shape', [x], [], `${id}_shape`, `${id}_shape`);
          node('Slice', [`${id}_shape`, c('starts', [0]), c('ends', [1]), c('axes', [0])], [], `${id}_batch`, `${id}_batch`);
          node('Concat', [`${id}_batch`, c('rest', [-1])], [int('axis', 0)], `${id}_dims`, `${id}_dims`);
          node('Reshape', [x, `${id}_dims`]);
        } else node('Flatten', [x], [int('axis', 1)]);
        outRank = 2;
        break;
      case 'reshape':
        node('Reshape', [x, addConst(int64Tensor(`${id}.shape`, [1, ...layer.shape]))]);
        outRank = 4;
        break;
      case 'pad': {
        const [t, l, b, r] = layer.pads;
        node('Pad', [x, addConst(int64Tensor(`${id}.pads`, [0, 0, t, l, 0, 0, b, r]))]);
        break;
      }
      case 'resize':
        if (layer.size) node('Resize', [x, '', '', addConst(int64Tensor(`${id}.sizes`, [1, a.inShape[0], ...layer.size]))], [str('mode', 'nearest')]);
        else {
          const [sh, sw] = typeof layer.scale === 'number' ? [layer.scale, layer.scale] : layer.scale!;
          node('Resize', [x, '', addConst(floatTensor(`${id}.scales`, [4], new Float32Array([1, 1, sh, sw])))], [str('mode', 'nearest')]);
        }
        break;
    }
    rank.set(id, outRank);
    previous = id;
  });

  const last = analysis.layers.at(-1)!;
  const outDims = (rank.get(last.id) ?? 4) === 2 ? [1, last.outShape[0]] : [1, ...last.outShape];
  const valueInfo = (name: string, dims: number[]): onnx.IValueInfoProto => ({ name, type: { tensorType: { elemType: FLOAT, shape: { dim: dims.map((d) => ({ dimValue: d })) } } } });
  const model: onnx.IModelProto = {
    irVersion: 7,
    producerName: 'ocellus-tests',
    opsetImport: [{ domain: '', version: 13 }],
    graph: {
      name: network.name,
      node: nodes,
      initializer: initializers,
      input: [valueInfo('input', [1, network.input.channels, network.input.height, network.input.width])],
      output: [valueInfo(last.id, outDims)],
    },
  };
  return onnxProto.ModelProto.encode(model).finish();
}
