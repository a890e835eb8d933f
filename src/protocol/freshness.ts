import { z } from 'zod';
import { keyRotationSchema, type KeyRotation } from './key-rotation.js';
import { keyIdOf, signCanonical, verifyCanonical } from './signing.js';
import { signerKey } from './verify-release.js';

export const FRESHNESS_FORMAT = 'ocellus.freshness/1';

const isoTime = z.string().datetime({ offset: true });
const digest = z.string().regex(/^[0-9a-f]{64}$/);

/**
 * The server's word, re-signed on a period, on the newest release of a device class: following the
 * timestamp role of the open update-security specifications (a short-lived statement naming the current
 * metadata, so a device can tell a withheld update or a frozen feed from "nothing new"). It names a release
 * and never carries one: a device acts on it only by saying it is behind.
 */
export const freshnessStatementSchema = z.strictObject({
  format: z.literal(FRESHNESS_FORMAT),
  deviceClassId: z.string().regex(/^[a-z0-9][a-z0-9._-]{0,63}$/),
  /** The highest-sequence release of the class, by id, sequence and signature digest; null while there is none. */
  latest: z.strictObject({ releaseId: z.string().max(64), version: z.number().int().positive(), digest }).nullable(),
  issuedAt: isoTime,
  expiresAt: isoTime,
});
export type FreshnessStatement = z.infer<typeof freshnessStatementSchema>;

export const signedFreshnessSchema = z.strictObject({
  statement: freshnessStatementSchema,
  /** base64 Ed25519 signature over canonicalJson(statement), by the release signing key. */
  signature: z.string().min(1),
  keyId: z.string(),
  /** The same key chain releases carry, so a device that trusts an earlier key follows it. */
  keyChain: z.array(keyRotationSchema).max(32).optional(),
});
export type SignedFreshness = z.infer<typeof signedFreshnessSchema>;

export function signFreshness(statement: FreshnessStatement, privateKeyPem: string, publicKeyPem: string, keyChain?: readonly KeyRotation[]): SignedFreshness {
  return {
    statement,
    signature: signCanonical(statement, privateKeyPem),
    keyId: keyIdOf(publicKeyPem),
    ...(keyChain && keyChain.length > 0 ? { keyChain: [...keyChain] } : {}),
  };
}

/** Delivers a device class's signed freshness statement; the bus does it with a retained message on the class's topic. */
export interface FreshnessPublisher {
  publishFreshness(deviceClassId: string, text: string): Promise<void>;
}

export type FreshnessRefusal = 'wrong-schema' | 'unknown-key' | 'bad-signature' | 'wrong-device-class';

export type FreshnessVerdict =
  | { ok: true; statement: FreshnessStatement; signerPem: string }
  | { ok: false; reason: FreshnessRefusal; detail: string };

/**
 * Checks a freshness statement as a device must: schema, signing key (the newest it trusts or one the chain
 * reaches from it, as for releases), Ed25519 signature over the statement as received, device class. Never
 * throws. Expiry and replay are the reader's to judge (freshnessOf, and the issuedAt of the last one kept).
 */
export function verifyFreshness(input: unknown, trustedKeys: readonly string[], deviceClassId: string): FreshnessVerdict {
  if (trustedKeys.length === 0) return { ok: false, reason: 'unknown-key', detail: 'this device trusts no signing key' };
  const parsed = signedFreshnessSchema.safeParse(input);
  if (!parsed.success) {
    const first = parsed.error.issues[0]!;
    return { ok: false, reason: 'wrong-schema', detail: `${first.path.join('.') || '(root)'}: ${first.message}` };
  }
  const key = signerKey(parsed.data, trustedKeys, false);
  if (!key.ok) return { ok: false, reason: 'unknown-key', detail: key.detail };
  if (!verifyCanonical((input as { statement: unknown }).statement, parsed.data.signature, key.pem)) {
    return { ok: false, reason: 'bad-signature', detail: 'Ed25519 signature does not match the statement' };
  }
  const statement = parsed.data.statement;
  if (statement.deviceClassId !== deviceClassId) {
    return { ok: false, reason: 'wrong-device-class', detail: `statement is for device class ${statement.deviceClassId}; this device is ${deviceClassId}` };
  }
  return { ok: true, statement, signerPem: key.pem };
}

/** What a device reads from the statement it holds, at a given time. */
export interface Freshness {
  /** A newer release of the class exists than any this device applied or holds (it was never sent it, or not yet). */
  stale: boolean;
  /** The statement is past its expiry: no fresh word from the server since (a cut link, a stopped server, a frozen feed). */
  expired: boolean;
}

/**
 * Judges a statement against the newest release the device knows (applied or waiting to apply): stale when
 * the statement names a higher sequence, or the same sequence with another signature digest (not the release
 * the device has); expired at and after its expiresAt.
 */
export function freshnessOf(statement: FreshnessStatement, known: { version: number; digest: string | null } | null, nowMs: number): Freshness {
  const latest = statement.latest;
  const stale =
    latest !== null &&
    (known === null || latest.version > known.version || (latest.version === known.version && known.digest !== null && known.digest !== latest.digest));
  return { stale, expired: Date.parse(statement.expiresAt) <= nowMs };
}
