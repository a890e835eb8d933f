import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { importNetworkFile, importTflite } from '../../src/network-files/index.js';
import { OP } from '../../src/network-files/tflite-ops.js';
import { analyzeNetwork } from '../../src/physics/network-cost.js';
import { InputError, networkSchema, type Network } from '../../src/schema/index.js';
import { mobileNetV1 } from '../support/physics-mobilenet.js';
import { efficientNetB0, mobileNetV2, resNet18 } from '../support/paper-networks.js';
import { exportTflite } from '../support/tflite-export.js';

const tmp = mkdtempSync(join(tmpdir(), 'ocellus-tflite-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

/** MobileNetV1 as a converter writes it: "same" padding stated on every convolution. */
function mobileNetV1Same(): Network {
  const n = mobileNetV1(1, 224);
  return networkSchema.parse({ ...n, layers: n.layers.map((l) => (l.op === 'conv' || l.op === 'dwconv' ? { ...l, padding: 'same' } : l)) });
}

/** The layer list with its batch-norm layers folded away, as a TFLite converter folds them: references move to the layer before. */
function batchNormFolded(network: Network): Network {
  const analysis = analyzeNetwork(network);
  const alias = new Map<string, string>();
  const layers: Network['layers'] = [];
  let previous = 'input';
  network.layers.forEach((layer, i) => {
    const id = String(analysis.layers[i]!.id);
    const resolve = (ref: string | number) => alias.get(String(ref)) ?? String(ref);
    if (layer.op === 'batchnorm') {
      alias.set(id, layer.input === undefined ? previous : resolve(layer.input));
      return;
    }
    const copy = { ...layer } as Network['layers'][number] & { input?: string | number; inputs?: Array<string | number> };
    if ('inputs' in layer) (copy as { inputs: string[] }).inputs = layer.inputs.map(resolve);
    else if (layer.input !== undefined) {
      const src = resolve(layer.input);
      if (src === previous) delete copy.input;
      else copy.input = src;
    }
    layers.push(copy);
    previous = id;
  });
  return networkSchema.parse({ ...network, layers });
}

describe('TFLite import against the papers (files built here with the flatbuffers builder from the project\'s layer lists)', () => {
  it('MobileNetV1 1.0-224 with int8 weights: 569 M mult-adds, 4.2 M parameters (Howard et al. 2017, Table 6), layers round-trip exactly', () => {
    const original = mobileNetV1Same();
    const imported = importTflite(exportTflite(original, { weights: 'int8', quantizeIo: true }), 'mobilenet_v1.tflite', { name: original.name });
    const back = networkSchema.parse(imported.network);
    expect(back.layers).toEqual(original.layers);
    const a = analyzeNetwork(back);
    expect(Math.abs(a.macs / 569e6 - 1)).toBeLessThan(0.01);
    expect(Math.abs(a.params - 4.2e6)).toBeLessThanOrEqual(0.05e6);
    expect(a).toEqual(analyzeNetwork(original));
    // int8 weights and int32 biases (the TFLite quantisation scheme; Jacob et al. 2018, §2.4): every parameter is counted once, by its stored type.
    expect(imported.weightStorage).toEqual({ int8: a.params - 1000, int32: 1000 });
    expect(back.input).toEqual({ channels: 3, height: 224, width: 224 });
  });

  // Same tolerances as the ONNX import test beside this file; batch norm is folded by converters, so the
  // TFLite layer lists are the papers' lists without their batch-norm layers, and batch_norm_params is 0.
  const cases: Array<[string, () => Network, number]> = [
    ['MobileNetV2 1.0-224: 300 M mult-adds (Sandler et al. 2018, Table 4)', mobileNetV2, 300e6],
    ['ResNet-18: 1.8 G multiply-adds (He et al. 2016, Table 1)', resNet18, 1.8e9],
    ['EfficientNet-B0: 0.39 G multiply-adds (Tan & Le 2019, Table 2)', efficientNetB0, 0.39e9],
  ];
  for (const [title, build, macs] of cases) {
    it(`${title}; explicit padding written as PAD + VALID reads back as the layer's padding`, () => {
      const original = build();
      const folded = batchNormFolded(original);
      const back = networkSchema.parse(importTflite(exportTflite(original), 'net.tflite', { name: original.name }).network);
      expect(back.layers).toEqual(folded.layers);
      const a = analyzeNetwork(back);
      const o = analyzeNetwork(original);
      expect(Math.abs(a.macs / macs - 1)).toBeLessThan(0.02);
      expect(a.macs).toBe(o.macs);
      expect(a.params).toBe(o.params);
      expect(a.batchNormParams).toBe(0);
      expect(a.peakActivationElements).toBe(o.peakActivationElements);
    });
  }

  it('a fused activation becomes its own zero-MAC layer after the op, and costs the same', () => {
    const original = batchNormFolded(mobileNetV2());
    const fused = importTflite(exportTflite(original, { fuseActivations: true }), 'fused.tflite');
    const plain = importTflite(exportTflite(original), 'plain.tflite');
    const f = networkSchema.parse(fused.network);
    expect(f.layers.map((l) => l.op)).toEqual(networkSchema.parse(plain.network).layers.map((l) => l.op));
    expect(f.layers[0]).toMatchObject({ id: 'act3/pre-activation', op: 'conv' });
    expect(f.layers[1]).toEqual({ id: 'act3', op: 'activation', fn: 'relu6' });
    expect(analyzeNetwork(f).macs).toBe(analyzeNetwork(original).macs);
  });

  it('float16 weights behind DEQUANTIZE ops (float16 post-training quantisation) count once each, as float16', () => {
    const original = mobileNetV1Same();
    const imported = importTflite(exportTflite(original, { weights: 'float16' }), 'v1-fp16.tflite');
    const back = networkSchema.parse(imported.network);
    expect(back.layers).toEqual(original.layers);
    const params = analyzeNetwork(back).params;
    expect(imported.weightStorage).toEqual({ float16: params - 1000, float32: 1000 });
  });

  it('tensor shapes are reported NHWC as the file holds them', () => {
    const imported = importTflite(exportTflite(mobileNetV1Same()), 'v1.tflite');
    expect(imported.tensorDims.get('conv1')).toEqual([1, 112, 112, 32]);
    expect(imported.tensorDims.get('pw13')).toEqual([1, 7, 7, 1024]);
    expect(imported.tensorDims.get('fc')).toEqual([1, 1000]);
    expect(imported.inputName).toBe('input');
  });

  it('a PAD read as the next convolution\'s padding keeps its padded shape in the reported tensor shapes', () => {
    const imported = importTflite(exportTflite(mobileNetV2()), 'v2.tflite');
    // The stem: 224×224 padded by 1 on every side, then a 3×3 stride-2 VALID convolution (Sandler et al. 2018, Table 2: 112² × 32).
    expect(imported.tensorDims.get('conv1/pad')).toEqual([1, 226, 226, 3]);
    expect(imported.tensorDims.get('act3')).toEqual([1, 112, 112, 32]);
  });
});

describe('TFLite import refusals', () => {
  const v1 = () => exportTflite(mobileNetV1Same());

  it('an unsupported op is an error naming the operator index and the op', () => {
    let at = -1;
    const bytes = exportTflite(mobileNetV2(), {
      editOps: (ops) => {
        at = ops.findIndex((o) => o.code === OP.RELU6);
        ops[at]!.code = 39; // TRANSPOSE
      },
    });
    const e = (() => {
      try {
        importTflite(bytes, 'transpose.tflite');
      } catch (err) {
        return err as InputError;
      }
    })();
    expect(e).toBeInstanceOf(InputError);
    expect(at).toBeGreaterThan(0);
    expect(e!.message).toBe(`transpose.tflite: subgraphs[0].operators[${at}]: operator ${at} (TRANSPOSE): op TRANSPOSE is not supported`);
  });

  it('a custom op is an error naming it', () => {
    const bytes = exportTflite(mobileNetV1Same(), { editOps: (ops) => Object.assign(ops[3]!, { code: 32, customCode: 'GreenhouseDetector' }) });
    expect(() => importTflite(bytes, 'custom.tflite')).toThrow('custom.tflite: subgraphs[0].operators[3]: operator 3 (CUSTOM "GreenhouseDetector"): custom op "GreenhouseDetector" is not supported');
  });

  it('a truncated file is refused, naming the file and where it ends', () => {
    const bytes = v1();
    for (const length of [6, 4000, bytes.length - 10]) {
      expect(() => importTflite(bytes.subarray(0, length), 'short.tflite')).toThrow(/^short\.tflite is not a readable TFLite file: .*(truncated or damaged)/);
    }
  });

  it('a file without the TFL3 identifier is refused when named .tflite', () => {
    expect(() => importNetworkFile(new TextEncoder().encode('greenhouse notes, not a model'), 'notes.tflite')).toThrow('notes.tflite is not a readable TFLite file: the file identifier is "nhou", not "TFL3"');
  });
});

async function ocellus(...args: string[]) {
  const io = captureIo(tmp);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err() };
}

describe('ocellus import-network on a .tflite file', () => {
  it('--json prints the keys of ocellus cost, and the written document costs the same', async () => {
    writeFileSync(join(tmp, 'mobilenet_v1.tflite'), exportTflite(mobileNetV1Same(), { weights: 'int8' }));
    const r = await ocellus('import-network', 'mobilenet_v1.tflite', '--out', 'v1.json', '--json');
    expect(r.code).toBe(0);
    const imported = JSON.parse(r.out);
    expect(Object.keys(imported).sort()).toEqual(['batch_norm_params', 'layers', 'macs', 'network', 'params', 'peak_activation_bytes']);
    const cost = await ocellus('cost', 'v1.json', '--json');
    expect(cost.code).toBe(0);
    const { network: _network, ...figures } = imported;
    expect(JSON.parse(cost.out)).toEqual(figures);
    const doc = JSON.parse(readFileSync(join(tmp, 'v1.json'), 'utf8'));
    expect(doc.notes).toMatch(/sha256 [0-9a-f]{64}/);
    expect(doc.notes).toContain('int8');
  });

  it('the summary names the format and the stored weight types', async () => {
    const r = await ocellus('import-network', 'mobilenet_v1.tflite');
    expect(r.code).toBe(0);
    expect(r.out).toContain('tflite');
    expect(r.out).toMatch(/weights stored\s+int8 4,20\d,\d{3}; int32 1,000/);
  });

  it('--input-shape N,C,H,W sets the NHWC input of a TFLite file', async () => {
    const r = await ocellus('import-network', 'mobilenet_v1.tflite', '--input-shape', '1,3,160,160', '--json');
    expect(r.code).toBe(0);
    expect(JSON.parse(r.out).network.input).toEqual({ channels: 3, height: 160, width: 160 });
  });

  it('a truncated file and a non-TFL3 file exit 2 with the reason', async () => {
    writeFileSync(join(tmp, 'cut.tflite'), readFileSync(join(tmp, 'mobilenet_v1.tflite')).subarray(0, 5000));
    const cut = await ocellus('import-network', 'cut.tflite');
    expect(cut.code).toBe(2);
    expect(cut.err).toContain('cut.tflite is not a readable TFLite file');
    writeFileSync(join(tmp, 'notes.tflite'), 'greenhouse notes, not a model\n');
    const notes = await ocellus('import-network', 'notes.tflite');
    expect(notes.code).toBe(2);
    expect(notes.err).toContain('not "TFL3"');
  });
});
