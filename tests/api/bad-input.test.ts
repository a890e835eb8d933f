import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ROUTES } from '../../src/api/index.js';
import { createHarness, deviceClass, goodProfile, model, network, removeDir, seedCatalog, task, tempDataDir, type Harness } from '../support/api-fixtures.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';

let h: Harness;
let releaseId: string;

beforeAll(async () => {
  h = createHarness(tempDataDir());
  await seedCatalog(h);
  const res = await h.call('POST', '/api/v1/releases', {
    body: { deviceClassId: deviceClass.id, tasks: { count: { profileId: goodProfile.id, revision: 1 } }, defaultTask: 'count' },
  });
  releaseId = ((await res.json()) as { release: { id: string } }).release.id;
  await h.call('POST', '/api/v1/devices', { body: { id: 'gh-01', deviceClassId: deviceClass.id, tags: [] } });
});
afterAll(() => {
  h.closeStore();
  removeDir(h.dir);
});

/** A valid body and a concrete path for each route that takes a JSON body. */
function validFor(key: string): { path: string; body: unknown } {
  const valid: Record<string, { path: string; body: unknown }> = {
    'device-classes.create': { path: '/api/v1/device-classes', body: { ...deviceClass, id: 'fuzz-class' } },
    'device-classes.update': { path: `/api/v1/device-classes/${deviceClass.id}`, body: deviceClass },
    'networks.create': { path: '/api/v1/networks', body: { ...network, id: 'fuzz-net' } },
    'networks.update': { path: `/api/v1/networks/${network.id}`, body: network },
    'tasks.create': { path: '/api/v1/tasks', body: { ...task, id: 'fuzz-task' } },
    'tasks.update': { path: `/api/v1/tasks/${task.id}`, body: task },
    'models.create': { path: '/api/v1/models', body: { ...model, id: 'fuzz-model' } },
    'models.update': { path: `/api/v1/models/${model.id}`, body: model },
    'profiles.create': { path: '/api/v1/profiles', body: { ...goodProfile, id: 'fuzz-profile' } },
    'profiles.update': { path: `/api/v1/profiles/${goodProfile.id}`, body: goodProfile },
    validate: { path: '/api/v1/validate', body: goodProfile },
    // A 1×1 PNG (the smallest sample image).
    'render-preview': { path: '/api/v1/render-preview', body: { profile: goodProfile, distanceM: 0.5, image: 'iVBORw0KGgoAAAANSUhEUgAAAAEAAAABCAYAAAAfFcSJAAAADUlEQVR42mNkYPhfDwAChwGA60e6kgAAAABJRU5ErkJggg==' } },
    plan: { path: '/api/v1/plan', body: { taskId: task.id, deviceClassId: deviceClass.id, modelIds: [model.id], options: { granuleKib: 256, nearMisses: 1 } } },
    'releases.create': { path: '/api/v1/releases', body: { deviceClassId: deviceClass.id, tasks: { count: { profileId: goodProfile.id, revision: 1 } }, defaultTask: 'count' } },
    'devices.enrol': { path: '/api/v1/devices', body: { id: 'gh-fuzz', deviceClassId: deviceClass.id, tags: ['a'] } },
    'devices.assign': { path: '/api/v1/devices/gh-01/assign', body: { releaseId } },
    'tokens.create': { path: '/api/v1/tokens', body: { role: 'viewer', label: 'fuzz' } },
    'rollouts.create': { path: '/api/v1/rollouts', body: { releaseId, target: { deviceIds: ['gh-01'] }, waves: [1] } },
  };
  const v = valid[key];
  if (!v) throw new Error(`no valid body for ${key}`);
  return v;
}

const TABLES = ['documents', 'profile_revisions', 'releases', 'devices', 'assignments', 'tokens', 'audit', 'rollouts', 'rollout_devices'];
function snapshot(): string {
  const counts = TABLES.map((t) => (sqlHandle(h.store).prepare(`SELECT COUNT(*) AS n FROM ${t}`).get() as { n: number }).n);
  const blobs = readdirSync(join(h.dir, 'blobs'), { recursive: true }).length;
  return JSON.stringify([counts, blobs]);
}

type Step = { kind: 'replace'; at: number; value: unknown } | { kind: 'delete'; at: number } | { kind: 'add'; at: number; key: string; value: unknown };

/** Every path to a value inside a JSON value, root first. */
function pathsOf(value: unknown, prefix: Array<string | number> = []): Array<Array<string | number>> {
  const out = [prefix];
  if (Array.isArray(value)) value.forEach((v, i) => out.push(...pathsOf(v, [...prefix, i])));
  else if (value && typeof value === 'object') for (const [k, v] of Object.entries(value)) out.push(...pathsOf(v, [...prefix, k]));
  return out;
}

function mutate(body: unknown, step: Step): unknown {
  const copy = structuredClone(body);
  const paths = pathsOf(copy);
  const path = paths[step.at % paths.length]!;
  if (path.length === 0) return step.kind === 'replace' ? step.value : copy;
  const parent = path.slice(0, -1).reduce<any>((o, k) => o[k], copy);
  const key = path[path.length - 1]!;
  if (step.kind === 'replace') parent[key] = step.value;
  else if (step.kind === 'delete') Array.isArray(parent) ? parent.splice(Number(key), 1) : delete parent[key];
  else if (parent[key] && typeof parent[key] === 'object' && !Array.isArray(parent[key])) parent[key][step.key] = step.value;
  return copy;
}

const stepArb: fc.Arbitrary<Step> = fc.oneof(
  fc.record({ kind: fc.constant('replace' as const), at: fc.nat(), value: fc.anything() }),
  fc.record({ kind: fc.constant('delete' as const), at: fc.nat() }),
  fc.record({ kind: fc.constant('add' as const), at: fc.nat(), key: fc.string({ maxLength: 8 }), value: fc.jsonValue() }),
);

const jsonRoutes = ROUTES.filter((r) => r.body !== undefined);

describe('bad bodies never give a 500 nor leave a row behind (fast-check)', () => {
  it.each(jsonRoutes.map((r) => [r.key, r] as const))('%s', async (key, r) => {
    const { path, body } = validFor(key);
    const method = r.method.toUpperCase();
    await fc.assert(
      fc.asyncProperty(
        fc.oneof(
          fc.anything().map((v) => ({ text: JSON.stringify(v) ?? 'undefined' })),
          fc.string().map((text) => ({ text })),
          fc.array(stepArb, { minLength: 1, maxLength: 3 }).map((steps) => ({ text: JSON.stringify(steps.reduce(mutate, body)) ?? 'null' })),
        ),
        async ({ text }) => {
          const before = snapshot();
          const res = await h.call(method, path, { body: text });
          expect(res.status, text.slice(0, 300)).toBeLessThan(500);
          // Every answer is JSON except the render preview's PNG.
          const payload = (res.status < 400 && key === 'render-preview' ? (expect(res.headers.get('content-type')).toBe('image/png'), {}) : await res.json()) as { error?: string; issues?: unknown[] };
          if (res.status >= 400) {
            expect(typeof payload.error).toBe('string');
            expect(Array.isArray(payload.issues)).toBe(true);
            expect(snapshot(), text.slice(0, 300)).toBe(before);
          }
        },
      ),
      { numRuns: 60, seed: 20250301 },
    );
  });

  it('weights upload: random bytes are refused (400) and leave no blob', async () => {
    await fc.assert(
      fc.asyncProperty(fc.uint8Array({ maxLength: 2000 }), async (bytes) => {
        const before = snapshot();
        const res = await h.call('PUT', `/api/v1/models/${model.id}/weights`, { body: Buffer.from(bytes) });
        expect(res.status).toBe(400);
        expect(snapshot()).toBe(before);
      }),
      { numRuns: 40, seed: 7 },
    );
  });

  it('query strings of every GET route never give a 500', async () => {
    const gets = ROUTES.filter((r) => r.method === 'get' && r.key !== 'metrics');
    await fc.assert(
      fc.asyncProperty(fc.constantFrom(...gets), fc.dictionary(fc.constantFrom('from', 'to', 'limit', 'class', 'tag', 'online', 'sha256', 'actor', 'deviceClass', 'x'), fc.string({ maxLength: 20 })), async (r, q) => {
        const path = r.path.replace(':revision', '1').replace(':id', r.path.includes('profiles') ? goodProfile.id : model.id);
        const res = await h.call('GET', `${path}?${new URLSearchParams(q).toString()}`);
        expect(res.status).toBeLessThan(500);
      }),
      { numRuns: 150, seed: 11 },
    );
  });
});
