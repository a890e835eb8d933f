import { signFreshness, type FreshnessStatement, type SignedFreshness } from '../protocol/freshness.js';
import type { KeyRotation } from '../protocol/key-rotation.js';
import { keyIdOf } from '../protocol/signing.js';
import { signRelease } from '../protocol/verify-release.js';
import type { Release, SignedRelease } from '../protocol/release.js';

/** Signs releases with the server's Ed25519 key and publishes the public half. */
export interface Signer {
  readonly keyId: string;
  readonly publicKeyPem: string;
  /** The rotations from the first key to this one, carried with every signed release. */
  readonly keyChain: readonly KeyRotation[];
  sign(release: Release): SignedRelease;
  /** Signs a device class's freshness statement with the same key, carrying the same chain. */
  signFreshness(statement: FreshnessStatement): SignedFreshness;
}

export function createSigner(keys: { privateKeyPem: string; publicKeyPem: string }, keyChain: readonly KeyRotation[] = []): Signer {
  return {
    keyId: keyIdOf(keys.publicKeyPem),
    publicKeyPem: keys.publicKeyPem,
    keyChain,
    sign: function sign(release) {
      return signRelease(release, keys.privateKeyPem, keys.publicKeyPem, keyChain);
    },
    signFreshness: function signFreshnessStatement(statement) {
      return signFreshness(statement, keys.privateKeyPem, keys.publicKeyPem, keyChain);
    },
  };
}
