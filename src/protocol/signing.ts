import { createHash, createPublicKey, generateKeyPairSync, sign, verify, type KeyObject } from 'node:crypto';
import { canonicalJson } from './canonical-json.js';

export interface SigningKeyPair {
  privateKeyPem: string;
  publicKeyPem: string;
}

export function generateSigningKeyPair(): SigningKeyPair {
  const { privateKey, publicKey } = generateKeyPairSync('ed25519');
  return {
    privateKeyPem: privateKey.export({ type: 'pkcs8', format: 'pem' }).toString(),
    publicKeyPem: publicKey.export({ type: 'spki', format: 'pem' }).toString(),
  };
}

export function keyIdOf(publicKeyPem: string | KeyObject): string {
  const key = typeof publicKeyPem === 'string' ? createPublicKey(publicKeyPem) : publicKeyPem;
  return createHash('sha256').update(key.export({ type: 'spki', format: 'der' })).digest('hex').slice(0, 16);
}

/** Ed25519 (RFC 8032) signature of the canonical JSON of a value, base64. */
export function signCanonical(value: unknown, privateKeyPem: string): string {
  return sign(null, Buffer.from(canonicalJson(value), 'utf8'), privateKeyPem).toString('base64');
}

/** True only when the signature matches the canonical JSON of the value under the given public key. */
export function verifyCanonical(value: unknown, signatureB64: string, publicKeyPem: string): boolean {
  try {
    return verify(null, Buffer.from(canonicalJson(value), 'utf8'), publicKeyPem, Buffer.from(signatureB64, 'base64'));
  } catch {
    return false;
  }
}
