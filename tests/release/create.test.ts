/**
 * Release creation as a domain operation: coded refusals (no HTTP in src/release), nothing written on a
 * refusal, and the stored text as the one form of a created release. The API's mapping of each code to a
 * status is checked here too, against RFC 9110 §15 (400 bad request, 404 not found, 409 conflict, 422
 * unprocessable content). Real SQLite in a temporary folder; demo data (greenhouse row camera).
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { refusalError } from '../../src/api/refusals.js';
import { createRelease } from '../../src/release/create.js';
import { releaseRequestSchema } from '../../src/release/request.js';
import { createSigner } from '../../src/release/signer.js';
import { generateSigningKeyPair } from '../../src/protocol/signing.js';
import { refuse } from '../../src/schema/refusal.js';
import { createBlobStore } from '../../src/store/index.js';
import { createHarness, deviceClass, failingProfile, goodProfile, removeDir, seedCatalog, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
const keys = generateSigningKeyPair();
const at = '2025-03-01T06:00:00.000Z';

beforeEach(async () => {
  h = createHarness(tempDataDir());
  await seedCatalog(h);
});
afterEach(() => {
  h.closeStore();
  removeDir(h.dir);
});

function create(tasks: Record<string, { profileId: string; revision: number }>, extra: Record<string, unknown> = {}) {
  const request = releaseRequestSchema.parse({ deviceClassId: deviceClass.id, tasks, defaultTask: Object.keys(tasks)[0], ...extra });
  return createRelease(request, { store: h.store, blobs: createBlobStore(h.dir), signer: createSigner(keys), actor: 'test operator', at });
}

describe('creating a release', () => {
  it('stores the signed release and returns the stored text, with its audit entry', () => {
    const r = create({ count: { profileId: goodProfile.id, revision: 1 } });
    expect(r.ok).toBe(true);
    if (!r.ok) return;
    expect(r.value.raw).toBe(h.store.releases.get(r.value.id)!.raw);
    expect(r.value.parsed.release.tasks.count!.profileId).toBe(goodProfile.id);
    expect(h.store.audit.query({ action: 'release.create' })).toHaveLength(1);
  });

  it('refuses failing checks with a code and the failing checks, writing nothing', () => {
    const r = create({ count: { profileId: failingProfile.id, revision: 1 } });
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.code).toBe('checks-failed');
    expect(Object.keys(r.detail?.failingChecks as object)).toEqual(['count']);
    expect(r.issues.every((i) => i.path === 'tasks.count')).toBe(true);
    expect(h.store.releases.list()).toEqual([]);
    expect(h.store.audit.query({ action: 'release.create' })).toEqual([]);
  });

  it('names a revision that is not stored, and does not take a version number', () => {
    const r = create({ count: { profileId: goodProfile.id, revision: 9 } });
    expect(r.ok || r.code).toBe('revisions-not-stored');
    expect(r.ok || r.issues).toEqual([{ path: 'tasks.count.revision', message: `profile '${goodProfile.id}' has no revision 9` }]);
    expect(h.store.releases.nextVersion(deviceClass.id)).toBe(1);
  });
});

describe('refusal codes as HTTP statuses (RFC 9110 §15)', () => {
  it('maps each kind of refusal to its status, keeping message, issues and detail', () => {
    const issues = [{ path: 'tasks.count', message: 'fails' }];
    expect(refusalError(refuse('revisions-not-stored', 'm')).status).toBe(400);
    expect(refusalError(refuse('device-not-found', 'm')).status).toBe(404);
    expect(refusalError(refuse('revisions-unfit', 'm')).status).toBe(409);
    const e = refusalError(refuse('checks-failed', 'some fail', issues, { failingChecks: { count: [] } }));
    expect([e.status, e.message, e.issues, e.extra]).toEqual([422, 'some fail', issues, { failingChecks: { count: [] } }]);
  });
});
