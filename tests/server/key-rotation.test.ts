import { existsSync, readFileSync, renameSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { dispatch } from '../../src/cli/main.js';
import { generateSigningKeyPair, keyIdOf } from '../../src/protocol/signing.js';
import { verifyRelease } from '../../src/protocol/verify-release.js';
import { createSigner } from '../../src/release/signer.js';
import { loadKeyChain, loadOrCreateSigningKey, rotateSigningKey } from '../../src/store/index.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, tempDir } from '../support/agent-fixtures.js';

const dirs: Array<{ remove(): void }> = [];
afterAll(() => dirs.forEach((d) => d.remove()));
const release = demoRelease('rel-rot-1', 1, { rows: demoTask('rows-net', demoWeights('rot'), 0.5, 4) });

function serverDir() {
  const d = tempDir('keys');
  dirs.push(d);
  return d.path;
}

describe('signing-key rotation (a new key vouched for by the old one)', () => {
  it('`ocellus key rotate` replaces the key; releases signed afterwards verify on a device that trusts only the first key', async () => {
    const dataDir = serverDir();
    const first = loadOrCreateSigningKey(dataDir, generateSigningKeyPair);
    const out: string[] = [];
    const code = await dispatch(['key', 'rotate', '--data', dataDir, '--json'], { stdout: (t) => out.push(t), stderr: () => {}, cwd: '/', env: {} });
    expect(code).toBe(0);
    const printed = JSON.parse(out.join('')) as { previousKeyId: string; keyId: string; chainLength: number };
    expect(printed).toMatchObject({ previousKeyId: keyIdOf(first.publicKeyPem), chainLength: 1 });
    const chain = loadKeyChain(dataDir);
    const second = loadOrCreateSigningKey(dataDir, generateSigningKeyPair);
    expect(keyIdOf(second.publicKeyPem)).toBe(printed.keyId);
    expect(statSync(join(dataDir, 'signing-key.pem')).mode & 0o777).toBe(0o600);
    expect(existsSync(join(dataDir, 'signing-keys', `${printed.previousKeyId}.pem`))).toBe(true);
    const signed = createSigner(second, chain).sign(release);
    const verdict = verifyRelease(JSON.parse(JSON.stringify(signed)), first.publicKeyPem, demoDeviceClass.id);
    expect(verdict.ok).toBe(true);
    if (verdict.ok) expect(keyIdOf(verdict.signerPem)).toBe(printed.keyId);
    // Without the chain the device has no reason to trust the new key.
    const bare = createSigner(second).sign(release);
    expect(verifyRelease(bare, first.publicKeyPem, demoDeviceClass.id)).toMatchObject({ ok: false, reason: 'unknown-key' });
  });

  it('two rotations chain: a device on the first key reaches the third through both statements', () => {
    const dataDir = serverDir();
    const first = loadOrCreateSigningKey(dataDir, generateSigningKeyPair);
    rotateSigningKey(dataDir, generateSigningKeyPair, '2025-06-01T00:00:00.000Z');
    rotateSigningKey(dataDir, generateSigningKeyPair, '2025-07-01T00:00:00.000Z');
    const chain = loadKeyChain(dataDir);
    expect(chain).toHaveLength(2);
    const third = loadOrCreateSigningKey(dataDir, generateSigningKeyPair);
    expect(verifyRelease(createSigner(third, chain).sign(release), first.publicKeyPem, demoDeviceClass.id).ok).toBe(true);
  });

  it('finishes a rotation a crash interrupted after the chain was written, and refuses a chain that ends at a key the folder lacks', () => {
    const dataDir = serverDir();
    loadOrCreateSigningKey(dataDir, generateSigningKeyPair);
    const r = rotateSigningKey(dataDir, generateSigningKeyPair, '2025-06-01T00:00:00.000Z');
    // Undo the last step (the rename): the new key waits in signing-key.next.pem, the old one is back in place.
    renameSync(join(dataDir, 'signing-key.pem'), join(dataDir, 'signing-key.next.pem'));
    writeFileSync(join(dataDir, 'signing-key.pem'), readFileSync(join(dataDir, 'signing-keys', `${r.previousKeyId}.pem`)), { mode: 0o600 });
    expect(loadKeyChain(dataDir)).toHaveLength(1);
    expect(keyIdOf(loadOrCreateSigningKey(dataDir, generateSigningKeyPair).publicKeyPem)).toBe(r.keyId);
    // A key file swapped by hand under a chain that names another key: the server refuses to start on it.
    writeFileSync(join(dataDir, 'signing-key.pem'), generateSigningKeyPair().privateKeyPem, { mode: 0o600 });
    expect(() => loadKeyChain(dataDir)).toThrow(/signing-key-chain\.json: the chain ends at key [0-9a-f]{16}, but signing-key\.pem holds key/);
  });
});
