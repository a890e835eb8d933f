/**
 * `ocellus tolerance --model-id … --server …` end to end against a real server on a temporary data folder:
 * the model and its uploaded weights come from the server, the measured curves go back as the model's next
 * version through the API (engineer token), and --out writes the same document to a file.
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApiClient } from '../../src/api-client/api-client.js';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';
import { stripeNetwork, writeStripeCards, writeStripeModel } from '../support/stripe-classifier.js';

const tmp = mkdtempSync(join(tmpdir(), 'ocellus-tolerance-server-'));
const SIZE = 64;
const ADMIN = `admin-${'t'.repeat(32)}`;
let server: RunningServer;
let engineer: string;
let viewer: string;
let model: ReturnType<typeof writeStripeModel>;

beforeAll(async () => {
  const cards = await writeStripeCards(join(tmp, 'images'), SIZE);
  writeFileSync(join(tmp, 'labels.csv'), 'image,label\n' + cards.map((c) => `${c.name},${c.label}`).join('\n') + '\n');
  model = writeStripeModel(tmp, SIZE);
  server = await startServer({ dataDir: join(tmp, 'server-data'), port: 0, adminToken: ADMIN, log: () => {} });
  const admin = createApiClient(server.url, ADMIN);
  engineer = (await admin.send<{ secret: string }>('POST', '/tokens', { role: 'engineer' })).secret;
  viewer = (await admin.send<{ secret: string }>('POST', '/tokens', { role: 'viewer' })).secret;
  const eng = createApiClient(server.url, engineer);
  await eng.send('POST', '/networks', stripeNetwork(SIZE));
  await eng.send('POST', '/models', JSON.parse(readFileSync(model.modelFile, 'utf8')));
  const up = await eng.raw('PUT', `/api/v1/models/stripe-model/weights`, { body: new Uint8Array(readFileSync(model.weightsFile)), headers: { 'content-type': 'application/octet-stream' } });
  expect(up.status).toBe(201);
});
afterAll(async () => {
  await server?.close();
  rmSync(tmp, { recursive: true, force: true });
});

async function ocellus(...args: string[]) {
  const io = captureIo(tmp);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err() };
}
const measure = (token: string, ...extra: string[]) =>
  ocellus('tolerance', '--model-id', 'stripe-model', '--server', server.url, '--token', token, '--images', 'images', '--labels', 'labels.csv', '--blur-px', '0,2,8', '--snr-db', '10,40', ...extra);

describe('ocellus tolerance against a running server', () => {
  it('measures with the uploaded weights and saves the curves as the model\'s next version; --out writes the same document', async () => {
    const r = await measure(engineer, '--json', '--out', 'from-server.json');
    expect(r.err).toBe('');
    expect(r.code).toBe(0);
    const j = JSON.parse(r.out);
    expect(j.savedVersion).toBe(2);
    expect(j.accuracyVsBlur[0]).toMatchObject({ blurPx: 0, accuracy: 1 });
    const stored = await createApiClient(server.url, viewer).get<{ version: number; document: Record<string, unknown> }>('/models/stripe-model');
    expect(stored.version).toBe(2);
    expect(stored.document.accuracyVsBlur).toEqual(j.accuracyVsBlur);
    expect(stored.document.accuracyVsSnr).toEqual(j.accuracyVsSnr);
    expect(stored.document.curveMetric).toBe('top1-vs-labels');
    expect(stored.document.blurUnit).toBe('input-px');
    expect(stored.document.sha256).toBe(model.sha256);
    expect(JSON.parse(readFileSync(join(tmp, 'from-server.json'), 'utf8'))).toEqual(stored.document);
    const history = await createApiClient(server.url, viewer).get<Array<{ version: number }>>('/models/stripe-model/history');
    expect(history.map((h) => h.version)).toEqual([1, 2]);
  });

  it('a viewer token cannot save: the server\'s refusal is printed, exit 2, and no version is added', async () => {
    const r = await measure(viewer);
    expect(r.code).toBe(2);
    expect(r.err).toMatch(/PUT \/api\/v1\/models\/stripe-model: 403/);
    const stored = await createApiClient(server.url, viewer).get<{ version: number }>('/models/stripe-model');
    expect(stored.version).toBe(2);
  });

  it('an unknown model id is the server\'s 404, exit 2', async () => {
    const r = await ocellus('tolerance', '--model-id', 'no-such-model', '--server', server.url, '--token', engineer, '--images', 'images', '--reference-predictions');
    expect(r.code).toBe(2);
    expect(r.err).toContain('404');
  });

  it('--model and --model-id together is a usage error', async () => {
    const r = await ocellus('tolerance', '--model', model.modelFile, '--model-id', 'stripe-model', '--images', 'images', '--reference-predictions');
    expect(r.code).toBe(2);
    expect(r.err).toContain('give exactly one of --model MODEL.json or --model-id ID');
  });
});
