/**
 * An ONNX file (protobuf, decoded with the ONNX definitions of `onnx-proto`) to a network document:
 * one layer per operator that computes on the image (MAC-carrying ones and the zero-MAC ones that keep
 * the graph whole), shapes inferred node by node in the file's (topological) order. Constants, whether
 * initializers or Constant nodes, size the weights; the small integer graphs that exported files use to
 * compute shapes (Shape → Slice → Concat → Reshape) are folded. Anything else is an error naming the node.
 */
import type { onnx } from 'onnx-proto';
import { InputError } from '../schema/issues.js';
import type { NetworkInput } from '../schema/network.js';
import { crossCheckShapes } from './cross-check.js';
import { layerIdOf } from './layer-id.js';
import { foldNode } from './onnx-fold.js';
import { onnxProto } from './onnx-proto.js';
import { chw, mapNode, NodeProblem, reshapeTo, resolveReshape, type LayerDraft, type Operand } from './onnx-layers.js';
import { attributesOf, constantNodeValue, elementCount, intsAttr, readTensor, toInt, type KnownTensor } from './onnx-tensors.js';

export interface OnnxImportOptions {
  /** N,C,H,W of the input, replacing symbolic or fixed dimensions in the file. */
  inputShape?: number[];
  name?: string;
  id?: string;
}

export interface ImportedNetwork {
  network: NetworkInput;
  /** ONNX dimensions of every computed (non-constant) tensor, by tensor name. */
  tensorDims: Map<string, number[]>;
  inputName: string;
  outputNames: string[];
  opsetVersion: number;
}

interface Activation {
  dims: number[];
  /** Id of the layer that produced it, or INPUT. */
  layer: string;
}

const INPUT = '\u0000input';

function decode(bytes: Uint8Array, source: string): onnx.ModelProto {
  let model: onnx.ModelProto;
  try {
    model = onnxProto.ModelProto.decode(bytes);
  } catch (e) {
    const reason = e instanceof Error ? e.message : String(e);
    throw new InputError(`${source} is not a readable ONNX file: ${reason}`, [{ path: '(file)', message: `protobuf decoding failed: ${reason}` }], source);
  }
  if (!model.graph || (model.graph.node ?? []).length === 0) {
    throw new InputError(`${source} is not an ONNX model: it has no graph of nodes`, [{ path: 'graph', message: 'missing or empty graph' }], source);
  }
  return model;
}


export function importOnnx(bytes: Uint8Array, source: string, options: OnnxImportOptions = {}): ImportedNetwork {
  const model = decode(bytes, source);
  const graph = model.graph!;
  const nodes = graph.node ?? [];
  const fail = (path: string, message: string): never => {
    throw new InputError(`${source}: ${path}: ${message}`, [{ path, message }], source);
  };

  const constants = new Map<string, KnownTensor>();
  for (const t of graph.initializer ?? []) constants.set(t.name ?? '', readTensor(t));
  const graphInputs = (graph.input ?? []).filter((i) => !constants.has(i.name ?? ''));
  if (graphInputs.length !== 1) fail('graph.input', `the model takes ${graphInputs.length} inputs; only networks of one image input are imported`);
  const input = graphInputs[0]!;
  const inputName = input.name ?? '';
  const fileDims = input.type?.tensorType?.shape?.dim ?? [];
  let dims: number[];
  if (options.inputShape) {
    dims = options.inputShape;
    if (fileDims.length && fileDims.length !== dims.length) fail('graph.input[0]', `input ${inputName} has ${fileDims.length} dimensions; --input-shape gives ${dims.length}`);
  } else {
    dims = fileDims.map((d, i) => {
      if (d.dimValue !== undefined && d.dimValue !== null && toInt(d.dimValue) > 0) return toInt(d.dimValue);
      return fail(`graph.input[0].type.shape.dim[${i}]`, `input ${inputName} has the symbolic dimension ${JSON.stringify(d.dimParam ?? '?')}; give --input-shape N,C,H,W`);
    });
  }
  if (dims.length !== 4 || dims[0] !== 1) fail('graph.input[0]', `input ${inputName} must be 1×C×H×W (one image), got [${dims.join(', ')}]`);

  const activations = new Map<string, Activation>([[inputName, { dims, layer: INPUT }]]);
  const consumers = new Map<string, number[]>();
  nodes.forEach((n, i) => (n.input ?? []).forEach((name) => consumers.set(name, [...(consumers.get(name) ?? []), i])));
  const layers: LayerDraft[] = [];
  const usedIds = new Set<string>();
  const skipped = new Set<number>();
  let last = INPUT;

  const lookup = (name: string) => constants.get(name) ?? activations.get(name);
  const emit = (nodeIndex: number, layer: LayerDraft, sources: string[], outName: string, outDims: number[]): string => {
    const node = nodes[nodeIndex]!;
    let id = layerIdOf(node.name || outName || `${node.opType}_${nodeIndex}`);
    for (let k = 2; usedIds.has(id); k++) id = layerIdOf(`${node.name || outName}_${k}`);
    usedIds.add(id);
    if (sources.includes(INPUT) && (sources.length > 1 || last !== INPUT)) {
      fail(`graph.node[${nodeIndex}]`, `node ${JSON.stringify(node.name ?? '')} (${node.opType}) reads the network input after other layers; a layer list cannot express that`);
    }
    const multi = layer.op === 'add' || layer.op === 'mul' || layer.op === 'concat';
    const draft = multi ? { id, ...layer, inputs: sources } : sources[0] === last ? { id, ...layer } : { id, input: sources[0]!, ...layer };
    layers.push(draft as LayerDraft);
    activations.set(outName, { dims: outDims, layer: id });
    last = id;
    return id;
  };

  nodes.forEach((node, i) => {
    if (skipped.has(i)) return;
    const op = node.opType ?? '';
    const where = `graph.node[${i}]`;
    const label = `node ${JSON.stringify(node.name ?? '')} (${op})`;
    const outName = node.output?.[0] ?? '';
    const inNames = node.input ?? [];
    try {
      if (op === 'Constant') {
        const value = constantNodeValue(attributesOf(node));
        if (!value) throw new NodeProblem('holds no tensor this importer reads (value, value_float(s), value_int(s))');
        constants.set(outName, value);
        return;
      }
      const isAct = inNames.map((n) => n !== '' && activations.has(n));
      for (const n of inNames) if (n !== '' && !lookup(n)) throw new NodeProblem(`its input ${JSON.stringify(n)} is not produced by any earlier node, initializer or graph input`);
      if (!isAct.some(Boolean)) {
        const folded = foldNode(node, lookup);
        if (!folded) throw new NodeProblem(`op ${op} over constants cannot be computed by this importer`);
        constants.set(outName, folded);
        return;
      }
      const operands: Array<Operand | undefined> = inNames.map((n) => (n === '' ? undefined : lookup(n)));
      const constant = inNames.map((n, k) => n !== '' && !isAct[k]);
      const act = (k: number) => activations.get(inNames[k]!)!;

      if (op === 'Shape') {
        const d = act(0).dims;
        constants.set(outName, foldNode(node, lookup) ?? { dims: [d.length], values: d });
        return;
      }
      if (op === 'Add' || op === 'Mul' || op === 'Sub' || op === 'Div') {
        if (isAct[0] && isAct[1]) {
          if (op === 'Sub' || op === 'Div') throw new NodeProblem(`${op} of two computed tensors is not supported`);
          const [a, b] = [act(0), act(1)];
          const outDims = elementCount(a.dims) >= elementCount(b.dims) ? a.dims : b.dims;
          emit(i, { op: op === 'Add' ? 'add' : 'mul', inputs: [a.layer, b.layer] }, [a.layer, b.layer], outName, outDims);
          return;
        }
        const k = isAct[0] ? 0 : 1;
        const x = act(k);
        const c = operands[1 - k]!;
        const count = elementCount(c.dims);
        const prev = layers.at(-1);
        if (op === 'Add' && prev && x.layer === last && (prev.op === 'matmul' || prev.op === 'fc') && !prev.bias && count === prev.out) {
          // MatMul + Add of a bias vector, as exporters write a linear layer: one layer with a bias.
          prev.bias = true;
          activations.set(outName, { dims: x.dims, layer: x.layer });
          return;
        }
        if (count > 1) throw new NodeProblem(`${op} with a constant of ${count} elements is not supported (only scalars, or a bias after MatMul)`);
        emit(i, { op: 'activation', fn: 'affine' }, [x.layer], outName, x.dims);
        return;
      }
      if (op === 'Sigmoid') {
        const users = consumers.get(outName) ?? [];
        const j = users[0];
        const partner = j === undefined ? undefined : nodes[j]!;
        if (users.length === 1 && partner?.opType === 'Mul' && (partner.input ?? []).includes(inNames[0]!) && (partner.input ?? []).includes(outName)) {
          // x · sigmoid(x), as exporters write SiLU/swish.
          skipped.add(j!);
          emit(i, { op: 'activation', fn: 'swish' }, [act(0).layer], partner.output?.[0] ?? '', act(0).dims);
          return;
        }
      }
      if (op === 'Concat') {
        if (!isAct.every(Boolean)) throw new NodeProblem('Concat of computed tensors with constants is not supported');
        const ins = inNames.map((_, k) => act(k));
        const axis = intsAttr(attributesOf(node), 'axis')?.[0] ?? toInt(attributesOf(node).get('axis')?.i ?? 1);
        const rank = ins[0]!.dims.length;
        if ((axis < 0 ? axis + rank : axis) !== 1) throw new NodeProblem(`Concat along axis ${axis} is not supported (only the channel axis 1)`);
        const outDims = [...ins[0]!.dims];
        outDims[1] = ins.reduce((s, t) => s + t.dims[1]!, 0);
        emit(i, { op: 'concat', inputs: ins.map((t) => t.layer) }, ins.map((t) => t.layer), outName, outDims);
        return;
      }
      if (op === 'Reshape' || op === 'Squeeze' || op === 'Unsqueeze') {
        const x = act(0);
        let outDims: number[];
        if (op === 'Reshape') {
          const shape = operands[1]?.values;
          if (!shape) throw new NodeProblem('its target shape is not a constant and could not be computed from constants');
          outDims = resolveReshape(x, shape, false);
        } else {
          const axes = (operands[1]?.values ?? intsAttr(attributesOf(node), 'axes') ?? []).map((ax) => (ax < 0 ? ax + x.dims.length + (op === 'Unsqueeze' ? 1 : 0) : ax));
          if (op === 'Squeeze') outDims = x.dims.filter((d, k) => !(d === 1 && (axes.length === 0 || axes.includes(k))));
          else {
            outDims = [...x.dims];
            for (const ax of [...axes].sort((p, q) => p - q)) outDims.splice(ax, 0, 1);
          }
        }
        const mapped = reshapeTo(x, outDims);
        if (mapped.layer) emit(i, mapped.layer, [x.layer], outName, outDims);
        else activations.set(outName, { dims: outDims, layer: x.layer });
        return;
      }
      if (!isAct[0]) throw new NodeProblem(`its first input ${JSON.stringify(inNames[0])} is a constant; only computed inputs are supported there`);
      for (let k = 1; k < isAct.length; k++) if (isAct[k]) throw new NodeProblem(`its input ${k} is a computed tensor; only constants are supported there`);
      const x = act(0);
      const mapped = mapNode(node, operands, constant);
      if (mapped.layer) emit(i, mapped.layer, [x.layer], outName, mapped.outDims);
      else activations.set(outName, { dims: mapped.outDims, layer: x.layer });
    } catch (e) {
      if (e instanceof NodeProblem) fail(where, `${label}: ${e.message}`);
      throw e;
    }
  });

  if (layers.length === 0) fail('graph.node', 'no node computes on the input');
  const network: NetworkInput = {
    kind: 'network',
    ...(options.id ? { id: options.id } : {}),
    name: options.name ?? (graph.name || 'imported network'),
    input: { channels: dims[1]!, height: dims[2]!, width: dims[3]! },
    layers,
  };
  crossCheck(network, activations, source);
  const tensorDims = new Map([...activations].map(([k, v]) => [k, v.dims]));
  const opset = (model.opsetImport ?? []).find((o) => !o.domain)?.version;
  return { network, tensorDims, inputName, outputNames: (graph.output ?? []).map((o) => o.name ?? ''), opsetVersion: opset === undefined || opset === null ? 0 : toInt(opset) };
}

/** The cost walk must reach the same c×h×w as the importer for every layer. */
function crossCheck(network: NetworkInput, activations: Map<string, Activation>, source: string): void {
  const byLayer = new Map<string, number[]>();
  for (const a of activations.values()) if (a.layer !== INPUT) byLayer.set(a.layer, chw(a.dims));
  crossCheckShapes(network, byLayer, source, 'ONNX');
}
