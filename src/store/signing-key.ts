import { existsSync, readFileSync, chmodSync } from 'node:fs';
import { createPublicKey } from 'node:crypto';
import { join } from 'node:path';
import { writeFileDurably } from './durable-file.js';

export interface SigningKeyFile {
  privateKeyPem: string;
  publicKeyPem: string;
  path: string;
}

/**
 * Loads the server's Ed25519 signing key from `<dataDir>/signing-key.pem`, or writes a new one (mode 0600)
 * made by `generate` on first start, fsynced with its folder so a power cut cannot leave an empty key behind
 * releases already signed with it. The public key is derived from the private key, so only one file is kept.
 */
export function loadOrCreateSigningKey(
  dataDir: string,
  generate: () => { privateKeyPem: string },
): SigningKeyFile {
  const path = join(dataDir, 'signing-key.pem');
  if (!existsSync(path)) {
    // 'wx' refuses to overwrite a key another process wrote in the meantime.
    try {
      writeFileDurably(path, generate().privateKeyPem, 0o600);
    } catch (e) {
      if ((e as NodeJS.ErrnoException).code !== 'EEXIST') throw e;
    }
  }
  chmodSync(path, 0o600);
  const privateKeyPem = readFileSync(path, 'utf8');
  const publicKeyPem = createPublicKey(privateKeyPem).export({ type: 'spki', format: 'pem' }).toString();
  return { privateKeyPem, publicKeyPem, path };
}
