import { join } from 'node:path';
import { describeCatalogIssue, loadCatalog } from '../document-files/index.js';
import type { ApiClient } from '../api-client/api-client.js';
import { inDependencyOrder, pushDocument, uploadWeightsFile } from '../api-client/push-documents.js';
import { canonicalJson } from '../protocol/canonical-json.js';
import type { SignedRelease } from '../protocol/release.js';
import type { Profile } from '../schema/profile.js';
import { DEMO_CLASSES, DEMO_TASKS, REVISED_PROFILE, type DemoClass } from './scenario.js';

export interface LoadedScenario {
  documents: { created: number; updated: number; unchanged: number };
  weightsUploaded: number;
  /** Profiles the validator fails (kept on the server to show what a failing profile looks like). */
  failingProfiles: string[];
}

/**
 * Sends the example scenario to the server through its API, as `ocellus push` would: device classes,
 * networks, models (with their stand-in weights), tasks and profiles, in dependency order.
 */
export async function loadScenario(api: ApiClient, catalogDir: string): Promise<LoadedScenario> {
  const catalog = await loadCatalog([catalogDir]);
  if (catalog.issues.length > 0) {
    throw new Error(`the demo scenario under ${catalogDir} has problems: ${catalog.issues.map(describeCatalogIssue).join('; ')}`);
  }
  const out: LoadedScenario = { documents: { created: 0, updated: 0, unchanged: 0 }, weightsUploaded: 0, failingProfiles: [] };
  for (const doc of inDependencyOrder(catalog.documents)) {
    const r = await pushDocument(api, doc);
    if (r.result === 'refused') {
      throw new Error(`the server refused ${doc.kind} ${doc.value.id} from ${doc.file}: ${r.error}${(r.issues ?? []).map((i) => `; ${i.path}: ${i.message}`).join('')}`);
    }
    out.documents[r.result] += 1;
    if (doc.kind === 'profile' && r.status === 'fail') out.failingProfiles.push(doc.value.id);
    if (doc.kind === 'model') {
      const weights = await uploadWeightsFile(api, doc.value.id, join(catalogDir, 'weights', `${doc.value.id}.bin`));
      if (weights.uploaded) out.weightsUploaded += 1;
    }
  }
  return out;
}

/** Builds and signs a release of the four tasks for one device class from the latest profile revisions. */
export async function createClassRelease(api: ApiClient, demoClass: DemoClass): Promise<SignedRelease> {
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
export async function createRevisedRelease(api: ApiClient): Promise<{ release: SignedRelease; revision: number; status: string }> {
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
