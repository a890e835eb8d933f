import { describe, expect, it } from 'vitest';
import { canonicalJson, generateSigningKeyPair, signRelease, verifyRelease } from '../../src/protocol/index.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, keys, sign } from '../support/agent-fixtures.js';

const weights = demoWeights('rows');
const release = demoRelease('rel-1', 1, { rows: demoTask('rows-net', weights, 0.5, 4) });

describe('verifyRelease', () => {
  it('accepts a release signed by the trusted key for this device class (Ed25519, RFC 8032)', () => {
    const verdict = verifyRelease(JSON.parse(JSON.stringify(sign(release))), keys.publicKeyPem, demoDeviceClass.id);
    expect(verdict.ok).toBe(true);
    if (verdict.ok) expect(verdict.release.id).toBe('rel-1');
  });

  it('refuses a release whose content changed after signing', () => {
    const signed = JSON.parse(JSON.stringify(sign(release)));
    signed.release.tasks.rows.camera.analogGain = 8;
    expect(verifyRelease(signed, keys.publicKeyPem, demoDeviceClass.id)).toMatchObject({ ok: false, reason: 'bad-signature', releaseId: 'rel-1' });
  });

  it('refuses a release signed by another key, even when it names the trusted key id', () => {
    const other = generateSigningKeyPair();
    const forged = { ...signRelease(release, other.privateKeyPem, other.publicKeyPem), keyId: sign(release).keyId };
    expect(verifyRelease(forged, keys.publicKeyPem, demoDeviceClass.id)).toMatchObject({ ok: false, reason: 'bad-signature' });
    const honest = signRelease(release, other.privateKeyPem, other.publicKeyPem);
    expect(verifyRelease(honest, keys.publicKeyPem, demoDeviceClass.id)).toMatchObject({ ok: false, reason: 'unknown-key' });
  });

  it('refuses a correctly signed release meant for another device class', () => {
    expect(verifyRelease(sign(release), keys.publicKeyPem, 'gh-rowcam-b')).toMatchObject({ ok: false, reason: 'wrong-device-class' });
  });

  it('refuses an unsigned or malformed release and names the field', () => {
    const verdict = verifyRelease({ release }, keys.publicKeyPem, demoDeviceClass.id);
    expect(verdict).toMatchObject({ ok: false, reason: 'wrong-schema', releaseId: 'rel-1' });
    if (!verdict.ok) expect(verdict.detail).toContain('signature');
    expect(verifyRelease('nonsense', keys.publicKeyPem, demoDeviceClass.id)).toMatchObject({ ok: false, reason: 'wrong-schema', releaseId: null });
  });

  it('signs the canonical JSON, so key order on the wire does not matter (RFC 8785 approach)', () => {
    const signed = sign(release);
    const reordered = JSON.parse(canonicalJson(signed.release), (_k, v) =>
      v && typeof v === 'object' && !Array.isArray(v) ? Object.fromEntries(Object.entries(v).reverse()) : v,
    );
    expect(verifyRelease({ ...signed, release: reordered }, keys.publicKeyPem, demoDeviceClass.id).ok).toBe(true);
  });
});
