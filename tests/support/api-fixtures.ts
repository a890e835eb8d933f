/** Shared set-up for the server tests: a real store in a temporary folder, the real app, and demo data documents. */
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createApp, createSigner } from '../../src/api/index.js';
import type { ReleasePublisher } from '../../src/protocol/release.js';
import { createMetricsRegistry, type MetricsRegistry } from '../../src/metrics/registry.js';
import { generateSigningKeyPair } from '../../src/protocol/signing.js';
import { createBlobStore, loadOrCreateSigningKey, type Role, type Store } from '../../src/store/index.js';
import { openTestStore } from './store-backend.js';

/** Demo data: a small greenhouse scout camera (invented numbers, same orders of magnitude as the greenhouse demo set). */
export const deviceClass = {
  kind: 'device-class',
  id: 'gh-test-scout',
  name: 'Greenhouse test scout (demo data)',
  demoData: true,
  lens: { focalLengthMm: 6, fNumberStops: [2, 2.8, 4, 5.6, 8, 11], nearestFocusM: 0.08, focusSettleMsPerDioptre: 3, apertureStepMs: 15 },
  sensor: {
    widthPx: 1280, heightPx: 800, pixelPitchUm: 3, quantumEfficiency: 0.62, fullWellE: 10500, darkNoiseE: 2.4, gainDnPerE: 0.39,
    bitDepth: 12, maxAnalogGain: 16, readoutMsPerFrame: 9, readoutEnergyPjPerPixel: 35, designWavelengthNm: 550,
  },
  isp: { latencyMsPerFrame: 3, energyPjPerPixel: 25 },
  accelerator: {
    macUnits: 256, clockMhz: 600, precision: 'int8', sramKib: 2048, dramBandwidthGbPerS: 3.2, energyPjPerMac: 0.25,
    energyPjPerSramByte: 1.5, energyPjPerDramByte: 200, staticPowerMw: 120, flashReadMbPerS: 40, powerGated: true,
  },
  platform: { powerBudgetW: 1.5 },
};

export const network = {
  kind: 'network',
  id: 'gh-test-net',
  name: 'Tiny test detector (demo data)',
  demoData: true,
  input: { channels: 3, height: 128, width: 128 },
  layers: [
    { id: 'stem', op: 'conv', out: 16, kernel: 3, stride: 2 },
    { id: 'dw1', op: 'dwconv', kernel: 3, stride: 2 },
    { id: 'pw1', op: 'conv', out: 32, kernel: 1 },
    { id: 'dw2', op: 'dwconv', kernel: 3, stride: 2 },
    { id: 'pw2', op: 'conv', out: 64, kernel: 1 },
    { id: 'head', op: 'conv', out: 32, kernel: 1, bias: true },
  ],
};

/** Deterministic demo weights: a sha256 chain, so tests can check every byte that comes back. */
export function demoWeights(sizeBytes: number): Buffer {
  const out = Buffer.alloc(sizeBytes);
  let block = createHash('sha256').update('ocellus demo data weights').digest();
  for (let i = 0; i < sizeBytes; i += 32) {
    block.copy(out, i, 0, Math.min(32, sizeBytes - i));
    block = createHash('sha256').update(block).digest();
  }
  return out;
}

export const weights = demoWeights(100_000);
export const weightsSha256 = createHash('sha256').update(weights).digest('hex');

export const model = {
  kind: 'model',
  id: 'gh-test-model',
  name: 'Test fruit finder (demo data)',
  version: '1-demo',
  demoData: true,
  sha256: weightsSha256,
  sizeBytes: weights.length,
  inputWidthPx: 128,
  inputHeightPx: 128,
  networkId: network.id,
  precision: 'int8',
  measuredForTaskIds: ['fruit-count-test'],
  accuracyVsBlur: [
    { blurPx: 0, accuracy: 0.93 },
    { blurPx: 4, accuracy: 0.91 },
    { blurPx: 10, accuracy: 0.8 },
    { blurPx: 14, accuracy: 0.68 },
  ],
  accuracyVsSnr: [
    { snrDb: 5, accuracy: 0.5 },
    { snrDb: 15, accuracy: 0.84 },
    { snrDb: 20, accuracy: 0.9 },
    { snrDb: 30, accuracy: 0.93 },
  ],
};

export const task = {
  kind: 'task',
  id: 'fruit-count-test',
  name: 'Fruit counting (demo data)',
  demoData: true,
  nearDistanceM: 0.3,
  farDistanceM: 1.2,
  featureSizeMm: 40,
  pixelsPerFeatureMin: 4,
  maxRelativeSpeedMPerS: 0.3,
  luminanceMinCdM2: 60,
  luminanceMaxCdM2: 3500,
  frameRateHz: 10,
  minAccuracy: 0.85,
  latencyBudgetMs: 100,
  energyBudgetMjPerFrame: 5,
  minSnrDb: 20,
};

export const goodProfile = {
  kind: 'profile',
  id: 'fruit-count-good',
  name: 'Fruit counting, sharp and bright enough (demo data)',
  demoData: true,
  taskId: task.id,
  deviceClassId: deviceClass.id,
  modelId: model.id,
  camera: { focusDistanceM: 0.48, fNumber: 4, exposureUs: 2500, analogGain: 1 },
  memory: { weightBufferKib: 256, activationBufferKib: 1024 },
};

/** Focused far beyond the working range with the lens wide open: the near plants blur (a failing check). */
export const failingProfile = {
  ...goodProfile,
  id: 'fruit-count-blurred',
  name: 'Fruit counting, focused at 5 m (demo data)',
  camera: { focusDistanceM: 5, fNumber: 2, exposureUs: 40000, analogGain: 1 },
};

export interface Harness {
  dir: string;
  store: Store;
  app: ReturnType<typeof createApp>;
  metrics: MetricsRegistry;
  tokens: Record<Role, string>;
  publicKeyPem: string;
  /** JSON request with a bearer token; body objects are sent as JSON, Buffers as bytes. */
  call(method: string, path: string, options?: { token?: string | null; body?: unknown; headers?: Record<string, string> }): Promise<Response>;
  /** Closes the store only (the folder stays, for restart tests). */
  closeStore(): void;
}

export function tempDataDir(): string {
  return mkdtempSync(join(tmpdir(), 'ocellus-api-'));
}

export function removeDir(dir: string): void {
  rmSync(dir, { recursive: true, force: true });
}

export function createHarness(
  dir: string,
  options: { publisher?: ReleasePublisher; maxWeightsBytes?: number; clock?: { now(): Date }; tokens?: Record<Role, string> } = {},
): Harness {
  const store = openTestStore(dir);
  const blobs = createBlobStore(dir);
  const key = loadOrCreateSigningKey(dir, generateSigningKeyPair);
  const metrics = createMetricsRegistry();
  const app = createApp({
    store,
    blobs,
    signer: createSigner(key),
    metrics,
    ...(options.publisher ? { publisher: options.publisher } : {}),
    ...(options.clock ? { clock: options.clock } : {}),
    limits: options.maxWeightsBytes ? { maxWeightsBytes: options.maxWeightsBytes } : {},
    onError: (e) => {
      throw e;
    },
  });
  const at = new Date().toISOString();
  const tokens =
    options.tokens ??
    (Object.fromEntries(
      (['viewer', 'engineer', 'operator', 'admin'] as const).map((role) => [role, store.tokens.create({ role, label: `test ${role}`, actor: 'test set-up', at }).secret]),
    ) as Record<Role, string>);
  return {
    dir,
    store,
    app,
    metrics,
    tokens,
    publicKeyPem: key.publicKeyPem,
    async call(method, path, opts = {}) {
      const headers: Record<string, string> = { ...opts.headers };
      const token = opts.token === undefined ? tokens.admin : opts.token;
      if (token !== null) headers.authorization = `Bearer ${token}`;
      let body: BodyInit | undefined;
      if (Buffer.isBuffer(opts.body)) {
        body = new Uint8Array(opts.body);
        headers['content-type'] ??= 'application/octet-stream';
      } else if (typeof opts.body === 'string') {
        body = opts.body;
        headers['content-type'] ??= 'application/json';
      } else if (opts.body !== undefined) {
        body = JSON.stringify(opts.body);
        headers['content-type'] ??= 'application/json';
      }
      return app.request(path, { method, headers, ...(body !== undefined ? { body } : {}) });
    },
    closeStore() {
      store.close();
    },
  };
}

/** Pushes the demo documents (dependency order) and uploads the weights; returns nothing, throws on any refusal. */
export async function seedCatalog(h: Harness, options: { profiles?: unknown[]; uploadWeights?: boolean } = {}): Promise<void> {
  const steps: Array<[string, unknown]> = [
    ['/api/v1/device-classes', deviceClass],
    ['/api/v1/networks', network],
    ['/api/v1/models', model],
    ['/api/v1/tasks', task],
  ];
  for (const [path, body] of steps) {
    const res = await h.call('POST', path, { body });
    if (res.status !== 201) throw new Error(`seeding ${path}: ${res.status} ${await res.text()}`);
  }
  if (options.uploadWeights ?? true) {
    const res = await h.call('PUT', `/api/v1/models/${model.id}/weights`, { body: weights });
    if (res.status !== 201) throw new Error(`uploading weights: ${res.status} ${await res.text()}`);
  }
  for (const p of options.profiles ?? [goodProfile, failingProfile]) {
    const res = await h.call('POST', '/api/v1/profiles', { body: p });
    if (res.status !== 201) throw new Error(`seeding profile: ${res.status} ${await res.text()}`);
  }
}
