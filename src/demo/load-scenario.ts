import { existsSync } from 'node:fs';
import { readFile } from 'node:fs/promises';
import { join } from 'node:path';
import { loadCatalog, type CatalogDocument } from '../catalog/index.js';
import { canonicalJson } from '../protocol/canonical-json.js';
import type { SignedRelease } from '../protocol/release.js';
import type { Profile } from '../schema/profile.js';
import { DemoApiError, type DemoApi } from './api-client.js';
import { DEMO_CLASSES, DEMO_TASKS, REVISED_PROFILE, type DemoClass } from './scenario.js';

const ORDER: CatalogDocument['kind'][] = ['device-class', 'network', 'model', 'task', 'profile'];
const COLLECTION: Record<CatalogDocument['kind'], string> = {
  'device-class': 'device-classes',
  network: 'networks',
  model: 'models',
  task: 'tasks',
  profile: 'profiles',
};

export interface LoadedScenario {
  documents: { created: number; updated: number; unchanged: number };
  weightsUploaded: number;
  /** Profiles the validator fails (kept on the server to show what a failing profile looks like). */
  failingProfiles: string[];
}

async function current(api: DemoApi, path: string): Promise<Record<string, unknown> | null> {
  try {
    return await api.json<Record<string, unknown>>('GET', path);
  } catch (e) {
    if (e instanceof DemoApiError && e.status === 404) return null;
    throw e;
  }
}

/** Creates a document, or saves a new version when the server holds a different one; returns what happened. */
async function putDocument(api: DemoApi, kind: CatalogDocument['kind'], value: { id: string }): Promise<{ result: 'created' | 'updated' | 'unchanged'; status?: string }> {
  const base = `/api/v1/${COLLECTION[kind]}`;
  const path = `${base}/${encodeURIComponent(value.id)}`;
  const existing = await current(api, path);
  const stored = existing ? (kind === 'profile' ? existing.profile : existing.document) : undefined;
  if (existing && canonicalJson(stored) === canonicalJson(value)) return { result: 'unchanged', ...(typeof existing.status === 'string' ? { status: existing.status } : {}) };
  const saved = existing ? await api.json<Record<string, unknown>>('PUT', path, value) : await api.json<Record<string, unknown>>('POST', base, value);
  return { result: existing ? 'updated' : 'created', ...(typeof saved.status === 'string' ? { status: saved.status } : {}) };
}

/**
 * Sends the example scenario to the server through its API, as `ocellus push` would: device classes,
 * networks, models (with their stand-in weights), tasks and profiles, in dependency order.
 */
export async function loadScenario(api: DemoApi, catalogDir: string): Promise<LoadedScenario> {
  const catalog = await loadCatalog([catalogDir]);
  if (catalog.issues.length > 0) {
    throw new Error(`the demo scenario under ${catalogDir} has problems: ${catalog.issues.map((i) => `${i.file}: ${i.path}: ${i.message}`).join('; ')}`);
  }
  const documents = [...catalog.documents].sort((a, b) => ORDER.indexOf(a.kind) - ORDER.indexOf(b.kind));
  const out: LoadedScenario = { documents: { created: 0, updated: 0, unchanged: 0 }, weightsUploaded: 0, failingProfiles: [] };
  for (const doc of documents) {
    const r = await putDocument(api, doc.kind, doc.value);
    out.documents[r.result] += 1;
    if (doc.kind === 'profile' && r.status === 'fail') out.failingProfiles.push(doc.value.id);
    if (doc.kind === 'model') {
      const model = await api.json<{ weights?: { uploaded: boolean } }>('GET', `/api/v1/models/${encodeURIComponent(doc.value.id)}`);
      const file = join(catalogDir, 'weights', `${doc.value.id}.bin`);
      if (!model.weights?.uploaded && existsSync(file)) {
        await api.upload(`/api/v1/models/${encodeURIComponent(doc.value.id)}/weights`, new Uint8Array(await readFile(file)));
        out.weightsUploaded += 1;
      }
    }
  }
  return out;
}

/** Builds and signs a release of the four tasks for one device class from the latest profile revisions. */
export async function createClassRelease(api: DemoApi, demoClass: DemoClass): Promise<SignedRelease> {
  const tasks: Record<string, { profileId: string; revision: number }> = {};
  for (const task of DEMO_TASKS) {
    const profileId = demoClass.profiles[task];
    const p = await api.json<{ revision: number }>('GET', `/api/v1/profiles/${encodeURIComponent(profileId)}`);
    tasks[task] = { profileId, revision: p.revision };
  }
  return api.json<SignedRelease>('POST', '/api/v1/releases', {
    deviceClassId: demoClass.deviceClassId,
    tasks,
    defaultTask: 'row-navigation',
    applyPolicy: 'when-idle',
  });
}

/** Saves the revised fruit-counting profile (a new revision, validated by the server) and releases it for its class. */
export async function createRevisedRelease(api: DemoApi): Promise<{ release: SignedRelease; revision: number; status: string }> {
  const path = `/api/v1/profiles/${REVISED_PROFILE.profileId}`;
  const latest = await api.json<{ profile: Profile; revision: number; status: string }>('GET', path);
  const revised: Profile = {
    ...latest.profile,
    notes: REVISED_PROFILE.notes,
    camera: { ...latest.profile.camera, ...REVISED_PROFILE.camera },
  };
  const saved =
    canonicalJson(revised) === canonicalJson(latest.profile)
      ? latest
      : await api.json<{ revision: number; status: string }>('PUT', path, revised);
  if (saved.status === 'fail') throw new Error(`the revised profile ${REVISED_PROFILE.profileId} fails its checks; the demo does not roll it out`);
  const demoClass = DEMO_CLASSES.find((c) => c.deviceClassId === REVISED_PROFILE.deviceClassId)!;
  return { release: await createClassRelease(api, demoClass), revision: saved.revision, status: saved.status };
}
