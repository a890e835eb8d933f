import { keyIdOf, signCanonical, verifyCanonical } from './signing.js';
import { signedReleaseSchema, type Release, type SignedRelease } from './release.js';

export type ReleaseRefusal = 'wrong-schema' | 'unknown-key' | 'bad-signature' | 'wrong-device-class';

export type ReleaseVerdict =
  | { ok: true; release: Release; signed: SignedRelease }
  | { ok: false; reason: ReleaseRefusal; detail: string; releaseId: string | null };

/** Signs a release with the server's Ed25519 key: signature over canonicalJson(release), key id of the public half. */
export function signRelease(release: Release, privateKeyPem: string, publicKeyPem: string): SignedRelease {
  return { release, signature: signCanonical(release, privateKeyPem), keyId: keyIdOf(publicKeyPem) };
}

function claimedReleaseId(input: unknown): string | null {
  const id = (input as { release?: { id?: unknown } } | null)?.release?.id;
  return typeof id === 'string' && id.length <= 64 ? id : null;
}

/**
 * Checks a signed release the way a device must before acting on it: schema, key id, Ed25519
 * signature over the canonical JSON of the release exactly as received, then the device class.
 * Never throws; a refusal carries the reason and the release id it claimed (null when unreadable).
 */
export function verifyRelease(input: unknown, publicKeyPem: string, expectedDeviceClassId: string): ReleaseVerdict {
  const releaseId = claimedReleaseId(input);
  const parsed = signedReleaseSchema.safeParse(input);
  if (!parsed.success) {
    const first = parsed.error.issues[0]!;
    return { ok: false, reason: 'wrong-schema', releaseId, detail: `${first.path.join('.') || '(root)'}: ${first.message}` };
  }
  const signed = parsed.data;
  const expectedKeyId = keyIdOf(publicKeyPem);
  if (signed.keyId !== expectedKeyId) {
    return { ok: false, reason: 'unknown-key', releaseId, detail: `signed with key ${signed.keyId}; this device trusts key ${expectedKeyId}` };
  }
  // Verify the object as received, not the parsed one: schema defaults must not change what was signed.
  const received = (input as { release: unknown }).release;
  if (!verifyCanonical(received, signed.signature, publicKeyPem)) {
    return { ok: false, reason: 'bad-signature', releaseId, detail: 'Ed25519 signature does not match the release content' };
  }
  if (signed.release.deviceClassId !== expectedDeviceClassId || signed.release.deviceClass.id !== expectedDeviceClassId) {
    return {
      ok: false,
      reason: 'wrong-device-class',
      releaseId,
      detail: `release is for device class ${signed.release.deviceClassId}; this device is ${expectedDeviceClassId}`,
    };
  }
  return { ok: true, release: signed.release, signed };
}
