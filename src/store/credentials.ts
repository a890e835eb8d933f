import { createHash, createHmac, randomBytes, scrypt, scryptSync, timingSafeEqual } from 'node:crypto';

// scrypt cost parameters: N = 2^14, r = 8, p = 1 are the interactive-login values of the scrypt paper
// (Percival, "Stronger key derivation via sequential memory-hard functions", 2009) and Node's defaults.
const SCRYPT = { N: 16384, r: 8, p: 1 } as const;
const KEY_BYTES = 32;

/** A fresh random secret, URL-safe, for device passwords and bearer tokens. */
export function newSecret(bytes = 24): string {
  return randomBytes(bytes).toString('base64url');
}

/** Hash of a password for storage: "scrypt$N$r$p$<salt b64>$<key b64>". */
export function hashPassword(password: string): string {
  const salt = randomBytes(16);
  const key = scryptSync(password, salt, KEY_BYTES, SCRYPT);
  return ['scrypt', SCRYPT.N, SCRYPT.r, SCRYPT.p, salt.toString('base64'), key.toString('base64')].join('$');
}

function parseStoredHash(stored: string) {
  const parts = stored.split('$');
  if (parts.length !== 6 || parts[0] !== 'scrypt') return null;
  const [N, r, p] = parts.slice(1, 4).map(Number) as [number, number, number];
  const salt = Buffer.from(parts[4]!, 'base64');
  const expected = Buffer.from(parts[5]!, 'base64');
  if (!Number.isInteger(N) || !Number.isInteger(r) || !Number.isInteger(p) || expected.length === 0) return null;
  return { salt, expected, cost: { N, r, p } };
}

/** Constant-time comparison of a password with a stored scrypt hash; false for any malformed hash. */
export function verifyPassword(password: string, stored: string): boolean {
  const h = parseStoredHash(stored);
  if (!h) return false;
  return timingSafeEqual(scryptSync(password, h.salt, h.expected.length, h.cost), h.expected);
}

/** The same as verifyPassword, with scrypt on libuv's thread pool so the event loop keeps turning. */
export function verifyPasswordAsync(password: string, stored: string): Promise<boolean> {
  const h = parseStoredHash(stored);
  if (!h) return Promise.resolve(false);
  return new Promise((resolve, reject) => {
    scrypt(password, h.salt, h.expected.length, h.cost, (err, actual) => (err ? reject(err) : resolve(timingSafeEqual(actual, h.expected))));
  });
}

// Device secrets are random 192-bit values (newSecret(24)), so a guess costs 2^191 tries on average: a slow KDF
// adds nothing there, and a keyed hash (HMAC-SHA256, RFC 2104) keeps a stolen database from confirming guesses
// without the server's key. It takes microseconds, so it runs on the event loop without stalling it.
const HMAC_PREFIX = 'hmac-sha256$';

/** Stored form of a device secret: "hmac-sha256$<base64 of HMAC-SHA256(key, secret)>". */
export function hashDeviceSecret(secret: string, key: Buffer): string {
  return HMAC_PREFIX + createHmac('sha256', key).update(secret, 'utf8').digest('base64');
}

/** True when the stored value is a keyed hash (not a legacy scrypt hash, not a revoked marker). */
export function isKeyedHash(stored: string): boolean {
  return stored.startsWith(HMAC_PREFIX);
}

// Compared against when the id is unknown, so an unknown id costs the same HMAC and comparison as an enrolled one.
const UNKNOWN = Buffer.alloc(32);

/** Constant-time check of a secret against a keyed hash; `stored` null (unknown id) does the same work and fails. */
export function verifyDeviceSecret(secret: string, stored: string | null, key: Buffer): boolean {
  const actual = createHmac('sha256', key).update(secret, 'utf8').digest();
  const expected = stored !== null && isKeyedHash(stored) ? Buffer.from(stored.slice(HMAC_PREFIX.length), 'base64') : null;
  const same = timingSafeEqual(actual, expected && expected.length === actual.length ? expected : UNKNOWN);
  return expected !== null && expected.length === actual.length && same;
}

/** True when the stored value is a legacy scrypt hash, verified once on the thread pool and then replaced. */
export function isScryptHash(stored: string): boolean {
  return stored.startsWith('scrypt$');
}

/** Bearer tokens are long random secrets, so a fast unsalted sha256 is enough to keep them unreadable at rest. */
export function hashToken(token: string): string {
  return createHash('sha256').update(token, 'utf8').digest('hex');
}

/** A new bearer token; the prefix makes a leaked one easy to recognise. */
export function newToken(): string {
  return `ocl_${newSecret(32)}`;
}
