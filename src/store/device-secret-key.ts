import { randomBytes } from 'node:crypto';
import { chmodSync, existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { writeFileDurably } from './durable-file.js';

const KEY_BYTES = 32;

/**
 * The server's key for device secrets: `<dataDir>/device-secret-key` (32 random bytes, mode 0600), created
 * on first start and written durably. Device secrets are stored as HMAC-SHA256 under it, so a copy of the
 * database alone does not let anyone test guesses; losing it means re-issuing every device's password.
 */
export function loadOrCreateDeviceSecretKey(dataDir: string): Buffer {
  const path = join(dataDir, 'device-secret-key');
  if (!existsSync(path)) {
    try {
      writeFileDurably(path, randomBytes(KEY_BYTES), 0o600);
    } catch (e) {
      if ((e as NodeJS.ErrnoException).code !== 'EEXIST') throw e;
    }
  }
  chmodSync(path, 0o600);
  const key = readFileSync(path);
  if (key.length !== KEY_BYTES) throw new Error(`${path}: expected ${KEY_BYTES} bytes, found ${key.length}; restore it from a backup`);
  return key;
}
