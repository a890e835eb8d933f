/**
 * The planner costs a model's shipped weights when the model takes its network from them
 * (`networkFrom: "weights"`), and skips the model — with the validator's reason — when the file gives no
 * network or one that differs from the declared document. The files are TFLite files the test writes.
 */
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { run as planCommand } from '../../src/cli/plan.js';
import { plan } from '../../src/plan/index.js';
import { networkSchema, type Network } from '../../src/schema/index.js';
import { smallModel, testDeviceClass, testNetwork, testTask, wideNetwork } from '../support/plan-fixtures.js';
import { exportTflite } from '../support/tflite-export.js';

/** The planner's default grid (the CLI's), on which test-small has a front. */
const SMALL_GRID = {};
const fromWeights = { ...smallModel, id: 'test-shipped', networkFrom: 'weights' as const, weightsFile: 'test-net-96.tflite' };
/** The wide network under the small one's id: what a stale hand-written list next to new weights looks like. */
const imposter: Network = networkSchema.parse({ ...wideNetwork, id: testNetwork.id });

describe('plan() with shipped networks', () => {
  it('a model whose file matches its declared network is planned, with the same front as when costed from the document', () => {
    const shipped = plan({ task: testTask, deviceClass: testDeviceClass, candidates: [{ model: fromWeights, network: testNetwork, shippedNetwork: testNetwork }], options: SMALL_GRID });
    const declared = plan({ task: testTask, deviceClass: testDeviceClass, candidates: [{ model: { ...smallModel, id: 'test-shipped' }, network: testNetwork }], options: SMALL_GRID });
    expect(shipped.skipped).toEqual([]);
    expect(shipped.front.length).toBeGreaterThan(0);
    expect(shipped.front).toEqual(declared.front);
  });

  it('a file that differs from the declared network, or gives none, skips the model with the reason', () => {
    const differs = plan({ task: testTask, deviceClass: testDeviceClass, candidates: [{ model: fromWeights, network: testNetwork, shippedNetwork: imposter }], options: SMALL_GRID });
    expect(differs.front).toEqual([]);
    expect(differs.skipped).toHaveLength(1);
    expect(differs.skipped[0]!.reason).toBe('network test-net-96 does not match the shipped weights of model test-shipped: the weights have 4 layers with MACs or parameters, network test-net-96 declares 6');
    const none = plan({ task: testTask, deviceClass: testDeviceClass, candidates: [{ model: fromWeights, network: testNetwork, shippedNetworkProblem: 'cannot read test-net-96.tflite: no such file' }], options: SMALL_GRID });
    expect(none.skipped[0]!.reason).toBe('model test-shipped takes its network from its weights, which gave none: cannot read test-net-96.tflite: no such file');
    expect(none.bindingConstraints).toEqual(['network-weights']);
  });
});

describe('ocellus plan with a model that takes its network from its weights file', () => {
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-plan-shipped-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));
  const write = (name: string, doc: unknown) => writeFileSync(join(dir, name), typeof doc === 'string' || doc instanceof Uint8Array ? doc : JSON.stringify(doc, null, 2));
  const bytes = exportTflite(testNetwork);
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  write('device-class.json', testDeviceClass);
  write('task.json', testTask);
  write('network.json', testNetwork);
  write('test-net-96.tflite', bytes);
  write('model.json', { ...fromWeights, sha256, sizeBytes: bytes.length });
  write('model-stale.json', { ...fromWeights, id: 'test-stale', sha256: 'a'.repeat(64) });

  const ocellusPlan = async (...args: string[]) => {
    const io = captureIo(dir);
    const code = await planCommand([...args, '--catalog', '.', '--json'], io);
    return { code, out: io.out(), err: io.err() };
  };

  it('costs the file beside the model and skips the model whose file has another sha256', async () => {
    const r = await ocellusPlan('--task', testTask.id, '--device-class', testDeviceClass.id, '--models', 'test-shipped,test-stale');
    expect(r.err).toBe('');
    const result = JSON.parse(r.out) as { front: Array<{ modelId: string }>; skipped: Array<{ modelId: string; reason: string }> };
    expect(result.front.length).toBeGreaterThan(0);
    expect(result.front.every((c) => c.modelId === 'test-shipped')).toBe(true);
    expect(result.skipped).toEqual([{ modelId: 'test-stale', reason: `model test-stale takes its network from its weights, which gave none: test-net-96.tflite has sha256 ${sha256}, the model declares ${'a'.repeat(64)}` }]);
  });
});
