import { z } from 'zod';
import { keyIdOf, signCanonical, verifyCanonical } from './signing.js';

export const KEY_ROTATION_FORMAT = 'ocellus.key-rotation/1';

/**
 * A statement that introduces a new signing key, signed by the key it replaces: the way trust moves
 * from one key to the next without touching devices (the root-of-trust rotation of the open update
 * security frameworks: a new key is vouched for by the old one).
 */
export const keyRotationStatementSchema = z.strictObject({
  format: z.literal(KEY_ROTATION_FORMAT),
  previousKeyId: z.string().regex(/^[0-9a-f]{16}$/),
  keyId: z.string().regex(/^[0-9a-f]{16}$/),
  publicKeyPem: z.string().min(1).max(1000),
  issuedAt: z.string().datetime({ offset: true }),
});
export type KeyRotationStatement = z.infer<typeof keyRotationStatementSchema>;

export const keyRotationSchema = z.strictObject({
  statement: keyRotationStatementSchema,
  /** base64 Ed25519 signature over canonicalJson(statement) by the previous key. */
  signature: z.string().min(1),
});
export type KeyRotation = z.infer<typeof keyRotationSchema>;

export function signKeyRotation(previous: { privateKeyPem: string; publicKeyPem: string }, nextPublicKeyPem: string, issuedAt: string): KeyRotation {
  const statement: KeyRotationStatement = {
    format: KEY_ROTATION_FORMAT,
    previousKeyId: keyIdOf(previous.publicKeyPem),
    keyId: keyIdOf(nextPublicKeyPem),
    publicKeyPem: nextPublicKeyPem,
    issuedAt,
  };
  return { statement, signature: signCanonical(statement, previous.privateKeyPem) };
}

export type ChainResult =
  | { ok: true; publicKeyPem: string; keyId: string; followed: number }
  | { ok: false; detail: string };

/**
 * Walks a key chain from a trusted key to `wantedKeyId`: each step must name the key before it and
 * carry that key's valid signature, and the key it introduces must match its key id. Links before the
 * trusted key are skipped (a device that already followed them). Never throws.
 */
export function followKeyChain(trustedPem: string, chain: readonly KeyRotation[], wantedKeyId: string): ChainResult {
  let currentPem = trustedPem;
  let currentId = keyIdOf(trustedPem);
  if (currentId === wantedKeyId) return { ok: true, publicKeyPem: currentPem, keyId: currentId, followed: 0 };
  const start = chain.findIndex((link) => link.statement.previousKeyId === currentId);
  if (start < 0) return { ok: false, detail: `no key rotation in the chain starts from the trusted key ${currentId}` };
  let followed = 0;
  for (const link of chain.slice(start)) {
    const s = link.statement;
    if (s.previousKeyId !== currentId) return { ok: false, detail: `key rotation to ${s.keyId} names ${s.previousKeyId}, not ${currentId}` };
    if (!verifyCanonical(link.statement, link.signature, currentPem)) {
      return { ok: false, detail: `key rotation to ${s.keyId} is not signed by the previous key ${currentId}` };
    }
    let introducedId: string;
    try {
      introducedId = keyIdOf(s.publicKeyPem);
    } catch {
      return { ok: false, detail: `key rotation to ${s.keyId} carries an unreadable public key` };
    }
    if (introducedId !== s.keyId) return { ok: false, detail: `key rotation claims key ${s.keyId} but carries ${introducedId}` };
    currentPem = s.publicKeyPem;
    currentId = introducedId;
    followed += 1;
    if (currentId === wantedKeyId) return { ok: true, publicKeyPem: currentPem, keyId: currentId, followed };
  }
  return { ok: false, detail: `the key chain does not reach key ${wantedKeyId}` };
}
