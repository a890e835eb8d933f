import { createHash, randomBytes } from 'node:crypto';
import { createReadStream, mkdirSync, readFileSync, readdirSync, rmSync, statSync, type ReadStream } from 'node:fs';
import { open, rename, rm } from 'node:fs/promises';
import { join } from 'node:path';
import { syncFolder } from './durable-file.js';

const SHA256_HEX = /^[0-9a-f]{64}$/;

export type BlobPutResult =
  | { ok: true; sha256: string; sizeBytes: number }
  | { ok: false; reason: 'too-large' | 'over-declared-size' | 'hash-mismatch' | 'size-mismatch'; detail: string };

export interface BlobPutExpectation {
  /** The hash the content must have; nothing is kept unless it matches. */
  sha256: string;
  /** Refuse (and stop reading) as soon as more than this many bytes arrive. */
  maxBytes: number;
  /** The declared size, when known: reading stops as soon as more than this arrives. */
  sizeBytes?: number;
}

/** A content-addressed store of model weights: `<dataDir>/blobs/sha256/<first 2 hex>/<hash>`. */
export interface BlobStore {
  readonly root: string;
  pathOf(sha256: string): string;
  /** Size in bytes of a stored blob, or null when absent. */
  sizeOf(sha256: string): number | null;
  /**
   * Streams content to a temporary file while hashing it, then renames it into place only when the hash
   * (and declared size) match. On any refusal or error the temporary file is removed.
   */
  put(source: AsyncIterable<Uint8Array>, expect: BlobPutExpectation): Promise<BlobPutResult>;
  /** The whole content of a stored blob, or null when absent. */
  readWhole(sha256: string): Buffer | null;
  /** Reads a stored blob, or the inclusive byte range [start, end] of it. */
  read(sha256: string, range?: { start: number; end: number }): ReadStream;
}

/**
 * Opens the store, creating its folders, and removes whatever an earlier process left in `tmp/` (uploads cut
 * by a crash): only one server uses a data folder, so at start nothing in it is being written.
 */
export function createBlobStore(dataDir: string): BlobStore {
  const root = join(dataDir, 'blobs');
  const tmpDir = join(root, 'tmp');
  mkdirSync(join(root, 'sha256'), { recursive: true, mode: 0o700 });
  mkdirSync(tmpDir, { recursive: true, mode: 0o700 });
  for (const name of readdirSync(tmpDir)) rmSync(join(tmpDir, name), { force: true, recursive: true });

  function pathOf(sha256: string): string {
    if (!SHA256_HEX.test(sha256)) throw new RangeError(`not a sha256 hex digest: ${JSON.stringify(sha256)}`);
    return join(root, 'sha256', sha256.slice(0, 2), sha256);
  }

  function sizeOf(sha256: string): number | null {
    try {
      return statSync(pathOf(sha256)).size;
    } catch {
      return null;
    }
  }

  async function put(source: AsyncIterable<Uint8Array>, expect: BlobPutExpectation): Promise<BlobPutResult> {
    const finalPath = pathOf(expect.sha256);
    const tmpPath = join(tmpDir, `${Date.now()}-${randomBytes(8).toString('hex')}.part`);
    const hash = createHash('sha256');
    const file = await open(tmpPath, 'wx', 0o644);
    let sizeBytes = 0;
    let closed = false;
    try {
      for await (const chunk of source) {
        sizeBytes += chunk.byteLength;
        if (sizeBytes > expect.maxBytes) {
          return { ok: false, reason: 'too-large', detail: `more than the ${expect.maxBytes}-byte limit for weights` };
        }
        // Cut at the declared size: the rest of an oversized body is never read or written.
        if (expect.sizeBytes !== undefined && sizeBytes > expect.sizeBytes) {
          return { ok: false, reason: 'over-declared-size', detail: `content is more than the ${expect.sizeBytes} bytes the model declares` };
        }
        hash.update(chunk);
        await file.write(chunk);
      }
      await file.sync();
      await file.close();
      closed = true;
      const actual = hash.digest('hex');
      if (actual !== expect.sha256) {
        return { ok: false, reason: 'hash-mismatch', detail: `content has sha256 ${actual}, the model declares ${expect.sha256}` };
      }
      if (expect.sizeBytes !== undefined && sizeBytes !== expect.sizeBytes) {
        return { ok: false, reason: 'size-mismatch', detail: `content is ${sizeBytes} bytes, the model declares ${expect.sizeBytes}` };
      }
      mkdirSync(join(root, 'sha256', expect.sha256.slice(0, 2)), { recursive: true });
      await rename(tmpPath, finalPath);
      syncFolder(join(root, 'sha256', expect.sha256.slice(0, 2)));
      return { ok: true, sha256: actual, sizeBytes };
    } finally {
      if (!closed) await file.close().catch(() => undefined);
      // After a successful rename this finds nothing; otherwise it removes the partial file.
      await rm(tmpPath, { force: true });
    }
  }

  function read(sha256: string, range?: { start: number; end: number }): ReadStream {
    return createReadStream(pathOf(sha256), range ? { start: range.start, end: range.end } : {});
  }

  function readWhole(sha256: string): Buffer | null {
    try {
      return readFileSync(pathOf(sha256));
    } catch (e) {
      if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
      throw e;
    }
  }

  return { root, pathOf, sizeOf, put, readWhole, read };
}
