import { closeSync, existsSync, fsyncSync, mkdirSync, openSync, readFileSync, renameSync, writeSync } from 'node:fs';
import { createPublicKey } from 'node:crypto';
import { join } from 'node:path';
import { z } from 'zod';
import { keyRotationSchema, signKeyRotation, type KeyRotation } from '../protocol/key-rotation.js';
import { keyIdOf } from '../protocol/signing.js';

const chainSchema = z.array(keyRotationSchema);

const chainPath = (dataDir: string) => join(dataDir, 'signing-key-chain.json');
const keyPath = (dataDir: string) => join(dataDir, 'signing-key.pem');
const nextKeyPath = (dataDir: string) => join(dataDir, 'signing-key.next.pem');

function fsyncPath(path: string): void {
  const fd = openSync(path, 'r');
  try {
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
}

/** Writes a file next to its final name, fsyncs it, renames it over, fsyncs the folder: all or nothing. */
function writeDurably(path: string, dir: string, content: string, mode: number): void {
  const temp = `${path}.tmp-${process.pid}`;
  const fd = openSync(temp, 'w', mode);
  try {
    writeSync(fd, content);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  renameSync(temp, path);
  fsyncPath(dir);
}

const publicOf = (privateKeyPem: string) => createPublicKey(privateKeyPem).export({ type: 'spki', format: 'pem' }).toString();

/**
 * The key rotations of this server, first key to current: `<dataDir>/signing-key-chain.json`. Finishes a
 * rotation a crash interrupted (the chain names the next key, which waits in signing-key.next.pem).
 * Throws, naming the file, when the chain is unreadable or does not end at the current key.
 */
export function loadKeyChain(dataDir: string): KeyRotation[] {
  const path = chainPath(dataDir);
  if (!existsSync(path)) return [];
  let chain: KeyRotation[];
  try {
    chain = chainSchema.parse(JSON.parse(readFileSync(path, 'utf8')));
  } catch (e) {
    throw new Error(`${path}: not a key chain (${(e as Error).message})`);
  }
  const last = chain[chain.length - 1];
  if (!last) return chain;
  const currentId = existsSync(keyPath(dataDir)) ? keyIdOf(publicOf(readFileSync(keyPath(dataDir), 'utf8'))) : null;
  if (currentId !== last.statement.keyId && existsSync(nextKeyPath(dataDir))) {
    const nextId = keyIdOf(publicOf(readFileSync(nextKeyPath(dataDir), 'utf8')));
    if (nextId === last.statement.keyId) {
      renameSync(nextKeyPath(dataDir), keyPath(dataDir));
      fsyncPath(dataDir);
      return chain;
    }
  }
  if (currentId !== last.statement.keyId) {
    throw new Error(`${path}: the chain ends at key ${last.statement.keyId}, but signing-key.pem holds key ${currentId ?? '(none)'}`);
  }
  return chain;
}

export interface Rotation {
  previousKeyId: string;
  keyId: string;
  rotation: KeyRotation;
  chainLength: number;
}

/**
 * Replaces the server's signing key with a new one introduced by a statement the current key signs.
 * Order on disk, each step durable: the new key to signing-key.next.pem, the old key archived under
 * signing-keys/<keyId>.pem, the chain with the new link, then the new key renamed over the current one
 * (a crash before that last step is finished by loadKeyChain). The running server keeps its key until restarted.
 */
export function rotateSigningKey(dataDir: string, generate: () => { privateKeyPem: string }, at: string): Rotation {
  const currentPem = readFileSync(keyPath(dataDir), 'utf8');
  const chain = loadKeyChain(dataDir);
  const previous = { privateKeyPem: currentPem, publicKeyPem: publicOf(currentPem) };
  const next = generate().privateKeyPem;
  const rotation = signKeyRotation(previous, publicOf(next), at);
  const archive = join(dataDir, 'signing-keys');
  mkdirSync(archive, { recursive: true, mode: 0o700 });
  writeDurably(join(archive, `${rotation.statement.previousKeyId}.pem`), archive, currentPem, 0o600);
  writeDurably(nextKeyPath(dataDir), dataDir, next, 0o600);
  writeDurably(chainPath(dataDir), dataDir, `${JSON.stringify([...chain, rotation], null, 2)}\n`, 0o644);
  renameSync(nextKeyPath(dataDir), keyPath(dataDir));
  fsyncPath(dataDir);
  return { previousKeyId: rotation.statement.previousKeyId, keyId: rotation.statement.keyId, rotation, chainLength: chain.length + 1 };
}
