import { createHash } from 'node:crypto';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { loadCatalog, mergeCatalogs, profilesOf, resolveProfile } from '../../src/document-files/index.js';

const repo = join(import.meta.dirname, '..', '..');
const demo = join(repo, 'profiles', 'greenhouse-demo');
const tmp = mkdtempSync(join(tmpdir(), 'ocellus-catalog-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

function write(rel: string, text: string): string {
  const file = join(tmp, rel);
  mkdirSync(join(file, '..'), { recursive: true });
  writeFileSync(file, text);
  return file;
}

const goodTask = {
  kind: 'task', id: 'weeding', name: 'Weeding', nearDistanceM: 0.3, farDistanceM: 0.6, featureSizeMm: 5, pixelsPerFeatureMin: 3,
  maxRelativeSpeedMPerS: 0.1, luminanceMinCdM2: 50, luminanceMaxCdM2: 2000, frameRateHz: 10, minAccuracy: 0.9,
  latencyBudgetMs: 100, energyBudgetMjPerFrame: 10,
};

describe('loading the demo catalog', () => {
  it('reads every demo document with no issues: 3 device classes, 3 networks, 6 models, 4 tasks, 10 profiles', async () => {
    const catalog = await loadCatalog([demo]);
    expect(catalog.issues).toEqual([]);
    const count = (k: string) => catalog.documents.filter((d) => d.kind === k).length;
    expect([count('device-class'), count('network'), count('model'), count('task'), count('profile')]).toEqual([3, 3, 6, 4, 10]);
    expect(catalog.documents.every((d) => (d.value as { demoData?: boolean }).demoData === true)).toBe(true);
  });

  it('resolves every demo profile to its task, device class, model and network', async () => {
    const catalog = await loadCatalog([demo]);
    for (const { file, profile } of profilesOf(catalog)) {
      const r = resolveProfile(catalog, profile, file);
      expect(r.ok, `${file}`).toBe(true);
    }
  });

  it("each demo model's sha256 and size match its stand-in weight file", async () => {
    const catalog = await loadCatalog([join(demo, 'models')]);
    for (const doc of catalog.documents) {
      if (doc.kind !== 'model') continue;
      const bytes = readFileSync(join(demo, 'weights', `${doc.value.id}.bin`));
      expect(createHash('sha256').update(bytes).digest('hex')).toBe(doc.value.sha256);
      expect(bytes.length).toBe(doc.value.sizeBytes);
    }
  });
});

describe('bad files are named with the field path and the reason, and loading carries on', () => {
  it('collects one issue per bad file and still loads the good ones', async () => {
    const dir = join(tmp, 'mixed');
    write('mixed/good.json', JSON.stringify(goodTask));
    write('mixed/good.yaml', 'kind: task\nid: pruning\nname: Pruning\nnearDistanceM: 0.2\nfarDistanceM: 0.5\nfeatureSizeMm: 3\npixelsPerFeatureMin: 3\nmaxRelativeSpeedMPerS: 0\nluminanceMinCdM2: 40\nluminanceMaxCdM2: 900\nframeRateHz: 5\nminAccuracy: 0.8\nlatencyBudgetMs: 200\nenergyBudgetMjPerFrame: 20\n');
    write('mixed/broken.json', '{"kind": "task", "id": ');
    write('mixed/broken.yaml', 'kind: task\n  id: [unclosed\n');
    write('mixed/no-kind.json', '{"id": "x"}');
    write('mixed/odd-kind.json', '{"kind": "lens", "id": "x"}');
    write('mixed/nested/bad-field.json', JSON.stringify({ ...goodTask, id: 'sowing', nearDistanceM: -1 }));
    write('mixed/list.json', '[1, 2]');
    write('mixed/notes.txt', 'not a document, skipped inside folders');
    const catalog = await loadCatalog([dir], { cwd: tmp });
    expect(catalog.documents.map((d) => d.value.id).sort()).toEqual(['pruning', 'weeding']);
    const byFile = Object.fromEntries(catalog.issues.map((i) => [i.file, i]));
    expect(Object.keys(byFile).sort()).toEqual(
      ['mixed/broken.json', 'mixed/broken.yaml', 'mixed/list.json', 'mixed/nested/bad-field.json', 'mixed/no-kind.json', 'mixed/odd-kind.json'],
    );
    expect(byFile['mixed/broken.json']!.message).toMatch(/^not valid JSON: /);
    expect(byFile['mixed/broken.yaml']!.message).toMatch(/^not valid YAML: /);
    expect(byFile['mixed/no-kind.json']).toMatchObject({ path: 'kind', message: expect.stringContaining('missing "kind"') });
    expect(byFile['mixed/odd-kind.json']).toMatchObject({ path: 'kind', message: expect.stringContaining('unknown kind "lens"') });
    expect(byFile['mixed/nested/bad-field.json']).toMatchObject({ path: 'nearDistanceM', message: 'must be greater than 0' });
    expect(byFile['mixed/list.json']!.path).toBe('(root)');
  });

  it('a missing path and an explicit non-document file are issues too', async () => {
    write('readme.txt', 'hello');
    const catalog = await loadCatalog(['does-not-exist', 'readme.txt'], { cwd: tmp });
    expect(catalog.issues).toEqual([
      { file: 'does-not-exist', path: '(root)', message: 'no such file or folder' },
      { file: 'readme.txt', path: '(root)', message: 'not a document file: name must end in .json, .yaml or .yml' },
    ]);
  });

  it('a second document with the same kind and id is refused, naming the first file', async () => {
    write('dupes/a.json', JSON.stringify(goodTask));
    write('dupes/b.json', JSON.stringify(goodTask));
    const catalog = await loadCatalog(['dupes'], { cwd: tmp });
    expect(catalog.documents).toHaveLength(1);
    expect(catalog.issues).toEqual([{ file: 'dupes/b.json', path: 'id', message: "duplicate task id 'weeding' (already defined in dupes/a.json)" }]);
  });

  it('overlapping paths read a file once', async () => {
    const catalog = await loadCatalog(['dupes/a.json', 'dupes/a.json'], { cwd: tmp });
    expect(catalog.documents).toHaveLength(1);
    expect(catalog.issues).toEqual([]);
  });

  it('a network without an id is known by its file name', async () => {
    write('nets/edge-net.json', JSON.stringify({ kind: 'network', name: 'Edge', input: { channels: 1, height: 4, width: 4 }, layers: [{ op: 'fc', out: 2 }] }));
    const catalog = await loadCatalog(['nets'], { cwd: tmp });
    expect(catalog.documents[0]?.value.id).toBe('edge-net');
  });
});

describe('resolving a profile', () => {
  it("a missing reference is located at the profile's file and field", async () => {
    write('orphan/greenhouse-x.json', JSON.stringify({
      kind: 'profile', id: 'greenhouse-x', taskId: 'foo', deviceClassId: 'gh-scout-a', modelId: 'row-guide-a',
      camera: { focusDistanceM: 1, fNumber: 4, exposureUs: 1000, analogGain: 1 }, memory: { weightBufferKib: 1, activationBufferKib: 1 },
    }));
    const catalog = mergeCatalogs(await loadCatalog(['orphan'], { cwd: tmp }), await loadCatalog([demo]));
    const [entry] = profilesOf(catalog);
    const r = resolveProfile(catalog, entry!.profile, entry!.file);
    expect(r).toEqual({
      ok: false,
      issues: [{ file: 'orphan/greenhouse-x.json', path: 'taskId', message: "profile greenhouse-x: taskId 'foo' not found in the catalog" }],
    });
  });

  it('merging keeps the first catalog’s documents when kinds and ids collide', async () => {
    const first = await loadCatalog(['dupes/a.json'], { cwd: tmp });
    const second = await loadCatalog(['mixed/good.json'], { cwd: tmp });
    const merged = mergeCatalogs(first, second);
    expect(merged.documents.map((d) => d.file)).toEqual(['dupes/a.json']);
  });
});
