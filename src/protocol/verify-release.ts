import { createHash } from 'node:crypto';
import { followKeyChain, type KeyRotation } from './key-rotation.js';
import { keyIdOf, signCanonical, verifyCanonical } from './signing.js';
import { signedReleaseSchema, type Release, type SignedRelease } from './release.js';

export type ReleaseRefusal = 'wrong-schema' | 'unknown-key' | 'bad-signature' | 'wrong-device-class' | 'not-in-audience' | 'expired';

export type ReleaseVerdict =
  | {
      ok: true;
      release: Release;
      signed: SignedRelease;
      /** sha256 (hex) of the signature bytes: what tells two releases apart, whatever their ids say. */
      digest: string;
      /** The key that signed it (PEM); a key newer than the device trusted, reached through the key chain. */
      signerPem: string;
    }
  | { ok: false; reason: ReleaseRefusal; detail: string; releaseId: string | null };

export interface VerifyOptions {
  /** The device's own id: a release that lists device ids must list it. */
  deviceId?: string;
  /** Now, in ms since the epoch: a release past its expiresAt is refused. Left out, expiry is not checked (a release already applied). */
  nowMs?: number;
  /** Accept a signature by any of the trusted keys, not only the newest (the release already stored on the device). */
  acceptEarlierKeys?: boolean;
}

/** Signs a release with the server's Ed25519 key: signature over canonicalJson(release), key id of the public half. */
export function signRelease(release: Release, privateKeyPem: string, publicKeyPem: string, keyChain?: readonly KeyRotation[]): SignedRelease {
  return {
    release,
    signature: signCanonical(release, privateKeyPem),
    keyId: keyIdOf(publicKeyPem),
    ...(keyChain && keyChain.length > 0 ? { keyChain: [...keyChain] } : {}),
  };
}

/** sha256 (hex) of a signed release's signature bytes. Ed25519 is deterministic, so equal content under one key gives one digest. */
export function signatureDigest(signatureB64: string): string {
  return createHash('sha256').update(Buffer.from(signatureB64, 'base64')).digest('hex');
}

function claimedReleaseId(input: unknown): string | null {
  const id = (input as { release?: { id?: unknown } } | null)?.release?.id;
  return typeof id === 'string' && id.length <= 64 ? id : null;
}

/**
 * The trusted key (PEM) that signed something under `keyId`: the newest trusted key (or, with acceptEarlier, any),
 * or a key the carried chain reaches from the newest. A key the newest has replaced is refused by name.
 */
export function signerKey(signed: Pick<SignedRelease, 'keyId' | 'keyChain'>, trusted: readonly string[], acceptEarlier: boolean): { ok: true; pem: string } | { ok: false; detail: string } {
  const newest = trusted[trusted.length - 1]!;
  const usable = acceptEarlier ? trusted : [newest];
  const known = usable.find((pem) => keyIdOf(pem) === signed.keyId);
  if (known) return { ok: true, pem: known };
  if (!acceptEarlier && trusted.slice(0, -1).some((pem) => keyIdOf(pem) === signed.keyId)) {
    return { ok: false, detail: `signed with key ${signed.keyId}, which key ${keyIdOf(newest)} has replaced` };
  }
  const chained = followKeyChain(newest, signed.keyChain ?? [], signed.keyId);
  if (chained.ok) return { ok: true, pem: chained.publicKeyPem };
  return { ok: false, detail: `signed with key ${signed.keyId}; this device trusts key ${keyIdOf(newest)} (${chained.detail})` };
}

/**
 * Checks a signed release the way a device must before acting on it: schema, signing key (the newest
 * the device trusts, or one the key chain reaches from it), Ed25519 signature over the canonical JSON
 * of the release exactly as received, device class, audience, expiry. Never throws; a refusal carries
 * the reason and the release id it claimed (null when unreadable).
 */
export function verifyRelease(input: unknown, trustedKeys: string | readonly string[], expectedDeviceClassId: string, options: VerifyOptions = {}): ReleaseVerdict {
  const trusted = typeof trustedKeys === 'string' ? [trustedKeys] : trustedKeys;
  const releaseId = claimedReleaseId(input);
  if (trusted.length === 0) return { ok: false, reason: 'unknown-key', releaseId, detail: 'this device trusts no signing key' };
  const parsed = signedReleaseSchema.safeParse(input);
  if (!parsed.success) {
    const first = parsed.error.issues[0]!;
    return { ok: false, reason: 'wrong-schema', releaseId, detail: `${first.path.join('.') || '(root)'}: ${first.message}` };
  }
  const signed = parsed.data;
  const key = signerKey(signed, trusted, options.acceptEarlierKeys === true);
  if (!key.ok) return { ok: false, reason: 'unknown-key', releaseId, detail: key.detail };
  // Verify the object as received, not the parsed one: schema defaults must not change what was signed.
  const received = (input as { release: unknown }).release;
  if (!verifyCanonical(received, signed.signature, key.pem)) {
    return { ok: false, reason: 'bad-signature', releaseId, detail: 'Ed25519 signature does not match the release content' };
  }
  const release = signed.release;
  if (release.deviceClassId !== expectedDeviceClassId || release.deviceClass.id !== expectedDeviceClassId) {
    return {
      ok: false,
      reason: 'wrong-device-class',
      releaseId,
      detail: `release is for device class ${release.deviceClassId}; this device is ${expectedDeviceClassId}`,
    };
  }
  const ids = release.audience?.deviceIds;
  if (ids && options.deviceId !== undefined && !ids.includes(options.deviceId)) {
    return { ok: false, reason: 'not-in-audience', releaseId, detail: `release is for ${ids.length} listed device(s), not ${options.deviceId}` };
  }
  if (options.nowMs !== undefined && release.expiresAt !== undefined && Date.parse(release.expiresAt) <= options.nowMs) {
    return { ok: false, reason: 'expired', releaseId, detail: `release expired at ${release.expiresAt}; ask for a fresh release` };
  }
  return { ok: true, release, signed, digest: signatureDigest(signed.signature), signerPem: key.pem };
}
