/**
 * A model that takes its network from its weights (`networkFrom: "weights"`): the server costs the uploaded
 * blob (found by the model's sha256) in validate, profile saves (and so the releases built from them) and
 * the planner, and a declared network that does not match the file is a failing check — as `ocellus check`
 * does with a file beside the model. The weights are a TFLite file the test writes from the declared layers.
 */
import { createHash } from 'node:crypto';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { analyzeNetwork } from '../../src/physics/network-cost.js';
import { candidateToProfile, type Candidate } from '../../src/plan/index.js';
import { networkSchema, type Check } from '../../src/schema/index.js';
import { createHarness, deviceClass, goodProfile, model, network, removeDir, task, tempDataDir, type Harness } from '../support/api-fixtures.js';
import { exportTflite } from '../support/tflite-export.js';

const shippedBytes = Buffer.from(exportTflite(networkSchema.parse(network), { weights: 'int8' }));
const shippedSha = createHash('sha256').update(shippedBytes).digest('hex');
const fromWeights = { ...model, sha256: shippedSha, sizeBytes: shippedBytes.length, networkFrom: 'weights', weightsFile: 'gh-test-net.tflite' };
/** The declared network with its head widened from 32 to 48 filters: no longer the file that ships. */
const wrongNetwork = { ...network, layers: network.layers.map((l) => (l.id === 'head' ? { ...l, out: 48 } : l)) };

let h: Harness;

async function seed(declared: unknown, upload = true, taskDoc: unknown = task) {
  for (const [path, body] of [['/api/v1/device-classes', deviceClass], ['/api/v1/networks', declared], ['/api/v1/models', fromWeights], ['/api/v1/tasks', taskDoc]] as const) {
    const res = await h.call('POST', path, { body });
    expect(res.status, `${path}: ${await res.clone().text()}`).toBe(201);
  }
  if (upload) expect((await h.call('PUT', `/api/v1/models/${model.id}/weights`, { body: shippedBytes })).status).toBe(201);
}

/** The fixture task with a 15 dB SNR floor, so that the small test scout has a feasible plan (demo data). */
const planTask = { ...task, minSnrDb: 15 };

const weightsCheck = (checks: Check[]) => checks.find((c) => c.code === 'network-weights');

beforeEach(() => {
  h = createHarness(tempDataDir());
});
afterEach(() => {
  h.closeStore();
  removeDir(h.dir);
});

describe('the server costs the shipped weights', () => {
  it('validate: a declared network equal to the uploaded file passes network-weights, with the file\'s MACs', async () => {
    await seed(network);
    const res = await h.call('POST', '/api/v1/validate', { body: goodProfile });
    expect(res.status).toBe(200);
    const { report } = (await res.json()) as { report: { status: string; checks: Check[] } };
    const c = weightsCheck(report.checks)!;
    expect(c.status).toBe('pass');
    expect(c.actual).toBe(analyzeNetwork(networkSchema.parse(network)).macs);
    expect(c.message).toContain('costs are from the file');
    expect(report.status).toBe('pass');
  });

  it('validate and profile save: a declared network that differs from the file fails, naming the layer; the release is refused', async () => {
    await seed(wrongNetwork);
    const res = await h.call('POST', '/api/v1/validate', { body: goodProfile });
    const { report } = (await res.json()) as { report: { status: string; checks: Check[] } };
    const c = weightsCheck(report.checks)!;
    expect(c.status).toBe('fail');
    expect(c.message).toContain('does not match the shipped weights');
    expect(c.message).toContain('declared head conv 48×');
    expect(report.status).toBe('fail');

    const saved = await h.call('POST', '/api/v1/profiles', { body: goodProfile });
    expect(saved.status).toBe(201);
    expect(((await saved.json()) as { status: string }).status).toBe('fail');
    const release = await h.call('POST', '/api/v1/releases', {
      body: { deviceClassId: deviceClass.id, tasks: { count: { profileId: goodProfile.id, revision: 1 } }, defaultTask: 'count' },
      token: h.tokens.operator,
    });
    expect(release.status).toBe(422);
    expect(await release.text()).toContain('network-weights');
  });

  it('weights not uploaded yet: network-weights fails saying so', async () => {
    await seed(network, false);
    const { report } = (await (await h.call('POST', '/api/v1/validate', { body: goodProfile })).json()) as { report: { checks: Check[] } };
    const c = weightsCheck(report.checks)!;
    expect(c.status).toBe('fail');
    expect(c.message).toContain(`the weights of model ${model.id} (sha256 ${shippedSha}) are not uploaded`);
  });
});

describe('the planner costs the shipped weights', () => {
  it('a matching model is planned from the file and its front passes the server\'s own validator', async () => {
    await seed(network, true, planTask);
    const res = await h.call('POST', '/api/v1/plan', { body: { taskId: task.id, deviceClassId: deviceClass.id, modelIds: [model.id] }, token: h.tokens.engineer });
    expect(res.status).toBe(200);
    const result = (await res.json()) as { front: Candidate[]; skipped: unknown[] };
    expect(result.skipped).toEqual([]);
    expect(result.front.length).toBeGreaterThan(0);
    const profile = candidateToProfile(result.front[0]!, { id: 'planned-check', taskId: task.id, deviceClassId: deviceClass.id, demoData: true });
    const { report } = (await (await h.call('POST', '/api/v1/validate', { body: profile })).json()) as { report: { status: string; checks: Check[] } };
    expect(weightsCheck(report.checks)!.status).toBe('pass');
    expect(report.status).toBe('pass');
  });

  it('a model whose declared network does not match its file is skipped with the network-weights reason', async () => {
    await seed(wrongNetwork, true, planTask);
    const res = await h.call('POST', '/api/v1/plan', { body: { taskId: task.id, deviceClassId: deviceClass.id, modelIds: [model.id] }, token: h.tokens.engineer });
    expect(res.status).toBe(200);
    const result = (await res.json()) as { front: unknown[]; skipped: Array<{ modelId: string; reason: string }> };
    expect(result.front).toEqual([]);
    expect(result.skipped).toHaveLength(1);
    expect(result.skipped[0]!.modelId).toBe(model.id);
    expect(result.skipped[0]!.reason).toContain('does not match the shipped weights');
    expect(result.skipped[0]!.reason).toContain('costed layer 5 differs');
  });
});
