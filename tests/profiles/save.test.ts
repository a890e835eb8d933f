/**
 * Saving profiles and documents in the domain, without HTTP: coded refusals, and each stored change landing
 * with its audit entry or not at all. Real SQLite (or the file's PostgreSQL schema) in a temporary folder;
 * demo data from tests/support/api-fixtures.ts.
 */
import { describe, expect, it } from 'vitest';
import { createDocument, updateDocument } from '../../src/documents/save.js';
import { createProfile, reviseProfile } from '../../src/profiles/save.js';
import { diffRevisions } from '../../src/profiles/diff.js';
import { issueToken, revokeToken } from '../../src/access/api-tokens.js';
import { enrolDevice, revokeDevice } from '../../src/fleet/enrolment/credentials.js';
import { profileSchema } from '../../src/schema/profile.js';
import { createBlobStore, type Store } from '../../src/store/index.js';
import { createShippedNetworks } from '../../src/profiles/shipped-networks.js';
import { deviceClass, goodProfile, model, network, task } from '../support/api-fixtures.js';
import { storeFolders } from '../support/store-folders.js';

const { tempDir, open } = storeFolders('domain');
const at = '2026-05-04T06:30:00.000Z';
const ctx = (store: Store) => ({ store, actor: 'grower-anna#7', at });
/** Profile saves also read shipped weights; these profiles' models take their network from the document. */
const profileCtx = (store: Store) => ({ ...ctx(store), shipped: createShippedNetworks(createBlobStore(store.dataDir)) });
const actions = (store: Store) => store.audit.query({ limit: 100 }).map((e) => e.action).sort();

function withDocuments(): Store {
  const store = open(tempDir());
  for (const [kind, doc] of [['device-class', deviceClass], ['network', network], ['task', task], ['model', model]] as const) {
    const r = createDocument(kind, doc as never, ctx(store));
    expect(r.ok).toBe(true);
  }
  return store;
}

describe('saving profiles and documents in the domain', () => {
  it('a profile revision and its audit entry land together; a second create and a revise of nothing are refused by code', () => {
    const store = withDocuments();
    const profile = profileSchema.parse(goodProfile);
    const first = createProfile(profile, profileCtx(store));
    expect(first.ok && first.value.revision).toBe(1);
    expect(createProfile(profile, profileCtx(store))).toMatchObject({ ok: false, code: 'profile-exists' });
    const ghost = reviseProfile({ ...profile, id: 'no-such-profile' }, profileCtx(store));
    expect(ghost).toMatchObject({ ok: false, code: 'profile-not-found', message: "profile 'no-such-profile' (use POST to create it) not found" });
    const second = reviseProfile({ ...profile, camera: { ...profile.camera, exposureUs: profile.camera.exposureUs + 100 } }, profileCtx(store));
    expect(second.ok && second.value.revision).toBe(2);
    expect(store.audit.query({ action: 'profile.revise', limit: 10 }).map((e) => e.detail)).toEqual([{ revision: 2, status: second.ok ? second.value.status : null }]);
    // Field-level diff of the two revisions: only the exposure changed.
    const diff = diffRevisions(store, profile.id, 1, 2);
    expect(diff.ok && diff.value.changes.map((c) => c.path)).toEqual(['camera.exposureUs']);
    expect(diffRevisions(store, profile.id, 1, 3)).toMatchObject({ ok: false, code: 'revision-not-found' });
  });

  it('a profile naming documents that are not stored is refused naming each field, and nothing is written', () => {
    const store = open(tempDir());
    const refused = createProfile(profileSchema.parse(goodProfile), profileCtx(store));
    expect(refused).toMatchObject({ ok: false, code: 'references-not-stored' });
    expect(!refused.ok && refused.issues.map((i) => i.path).sort()).toEqual(['deviceClassId', 'modelId', 'taskId']);
    expect(store.profiles.list()).toEqual([]);
    expect(store.audit.query({ limit: 10 })).toEqual([]);
  });

  it('a model naming an unstored network is refused; an update names the fields it changed in its audit entry', () => {
    const store = open(tempDir());
    expect(createDocument('model', model as never, ctx(store))).toMatchObject({ ok: false, code: 'references-not-stored', issues: [{ path: 'networkId' }] });
    expect(createDocument('device-class', deviceClass as never, ctx(store)).ok).toBe(true);
    expect(createDocument('device-class', deviceClass as never, ctx(store))).toMatchObject({ ok: false, code: 'document-exists' });
    const renamed = { ...deviceClass, name: `${deviceClass.name} (refit)` };
    const updated = updateDocument('device-class', renamed as never, ctx(store));
    expect(updated.ok && updated.value.version).toBe(2);
    expect(store.audit.query({ action: 'device-class.update', limit: 10 })[0]!.detail).toEqual({ version: 2, changed: ['name'] });
    expect(updateDocument('task', { ...task, id: 'no-such-task' } as never, ctx(store))).toMatchObject({ ok: false, code: 'document-not-found' });
  });

  it('device credentials and API tokens: each change is audited once; refusals carry their codes', () => {
    const store = withDocuments();
    expect(enrolDevice({ id: 'gh-a-09', deviceClassId: 'no-such-class', tags: [] }, ctx(store))).toMatchObject({ ok: false, code: 'unknown-device-class' });
    const enrolled = enrolDevice({ id: 'gh-a-09', deviceClassId: deviceClass.id, tags: ['bay-3', 'bay-3', 'north'] }, ctx(store));
    expect(enrolled.ok && enrolled.value.device.tags).toEqual(['bay-3', 'north']);
    expect(enrolDevice({ id: 'gh-a-09', deviceClassId: deviceClass.id, tags: [] }, ctx(store))).toMatchObject({ ok: false, code: 'device-enrolled' });
    expect(revokeDevice('gh-a-99', ctx(store))).toMatchObject({ ok: false, code: 'device-not-found' });
    const token = issueToken({ role: 'viewer' }, ctx(store));
    expect(token.token.label).toBe('viewer token');
    expect(revokeToken(token.token.id, ctx(store)).ok).toBe(true);
    // Revoking again keeps the first time and writes no second entry.
    expect(revokeToken(token.token.id, ctx(store)).ok).toBe(true);
    expect(revokeToken(9999, ctx(store))).toMatchObject({ ok: false, code: 'token-not-found' });
    expect(actions(store).filter((a) => !a.endsWith('.create') || a === 'token.create')).toEqual(['device.enrol', 'token.create', 'token.revoke']);
  });
});
