import { afterEach, describe, expect, it } from 'vitest';
import { createFreshnessService, FRESHNESS_LIFETIME_MS, FRESHNESS_PERIOD_MS } from '../../src/release/freshness-statements.js';
import { createSigner } from '../../src/release/signer.js';
import { generateSigningKeyPair, signKeyRotation, signatureDigest, verifyFreshness, type SignedFreshness } from '../../src/protocol/index.js';
import { openStore, type Store } from '../../src/store/index.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, keys, sign, tempDir } from '../support/agent-fixtures.js';

// The server side of the freshness statement: one per device class, naming its newest release, re-signed on a
// period with the release key and its rotation chain. Demo data.

const tasks = { rows: demoTask('rows-net', demoWeights('rows-net s1'), 0.5, 4) };
const cleanups: Array<() => void> = [];
afterEach(() => cleanups.splice(0).forEach((c) => c()));

function setUp() {
  const dir = tempDir('freshness');
  const store: Store = openStore(dir.path);
  cleanups.push(() => (store.close(), dir.remove()));
  let nowMs = Date.parse('2026-03-02T06:00:00.000Z');
  const sent: Array<{ deviceClassId: string; signed: SignedFreshness }> = [];
  const publisher = { publishFreshness: async (deviceClassId: string, text: string) => void sent.push({ deviceClassId, signed: JSON.parse(text) as SignedFreshness }) };
  const add = (id: string, version: number) => {
    const signed = sign(demoRelease(id, version, tasks));
    store.releases.insert({ id, deviceClassId: demoDeviceClass.id, version, createdAt: new Date(nowMs).toISOString(), createdBy: 'test (demo data)', signed });
    return signed;
  };
  return { store, sent, publisher, add, clock: { now: () => new Date(nowMs) }, advance: (ms: number) => (nowMs += ms) };
}

describe('freshness statements on the server', () => {
  it('signs one statement per class naming its newest release, valid for a day, verifiable by a device', async () => {
    const s = setUp();
    s.add('rel-s1', 1);
    const v2 = s.add('rel-s2', 2);
    const service = createFreshnessService({ releases: s.store.releases, signer: createSigner(keys), publisher: s.publisher, clock: s.clock });
    expect(await service.refresh()).toBe(1);
    const { signed } = s.sent[0]!;
    expect(signed.statement).toEqual({
      format: 'ocellus.freshness/1', deviceClassId: demoDeviceClass.id,
      latest: { releaseId: 'rel-s2', version: 2, digest: signatureDigest(v2.signature) },
      issuedAt: '2026-03-02T06:00:00.000Z', expiresAt: '2026-03-03T06:00:00.000Z',
    });
    expect(FRESHNESS_LIFETIME_MS / FRESHNESS_PERIOD_MS).toBe(24);
    expect(verifyFreshness(signed, [keys.publicKeyPem], demoDeviceClass.id)).toMatchObject({ ok: true });
    expect(verifyFreshness(signed, [keys.publicKeyPem], 'gh-othercam')).toMatchObject({ ok: false, reason: 'wrong-device-class' });
    // A changed byte of the statement breaks the signature.
    const tampered = { ...signed, statement: { ...signed.statement, expiresAt: '2027-03-03T06:00:00.000Z' } };
    expect(verifyFreshness(tampered, [keys.publicKeyPem], demoDeviceClass.id)).toMatchObject({ ok: false, reason: 'bad-signature' });
  });

  it('re-signs after its period, and at once when a newer release is made; issuedAt only increases', async () => {
    const s = setUp();
    s.add('rel-p1', 1);
    const service = createFreshnessService({ releases: s.store.releases, signer: createSigner(keys), publisher: s.publisher, clock: s.clock });
    await service.refresh();
    s.advance(FRESHNESS_PERIOD_MS - 1);
    expect(await service.refresh()).toBe(0);
    s.advance(1);
    expect(await service.refresh()).toBe(1);
    expect(s.sent[1]!.signed.statement.issuedAt).toBe('2026-03-02T07:00:00.000Z');
    s.add('rel-p2', 2);
    expect(await service.refresh()).toBe(1);
    expect(s.sent.map((x) => x.signed.statement.latest?.releaseId)).toEqual(['rel-p1', 'rel-p1', 'rel-p2']);
    // Made in the same millisecond as the one before: still later.
    expect(Date.parse(s.sent[2]!.signed.statement.issuedAt)).toBeGreaterThan(Date.parse(s.sent[1]!.signed.statement.issuedAt));
  });

  it('signs with a rotated key and carries the chain, so a device configured with the first key follows it', async () => {
    const s = setUp();
    s.add('rel-r1', 1);
    const next = generateSigningKeyPair();
    const chain = [signKeyRotation(keys, next.publicKeyPem, '2026-03-01T00:00:00.000Z')];
    const service = createFreshnessService({ releases: s.store.releases, signer: createSigner(next, chain), publisher: s.publisher, clock: s.clock });
    await service.refresh();
    const { signed } = s.sent[0]!;
    expect(signed.keyChain).toHaveLength(1);
    expect(verifyFreshness(signed, [keys.publicKeyPem], demoDeviceClass.id)).toMatchObject({ ok: true, signerPem: next.publicKeyPem });
    // Without the chain the first key cannot reach the new one.
    const { keyChain: _dropped, ...bare } = signed;
    expect(verifyFreshness(bare, [keys.publicKeyPem], demoDeviceClass.id)).toMatchObject({ ok: false, reason: 'unknown-key' });
  });
});
