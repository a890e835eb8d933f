import { createHash, randomBytes } from 'node:crypto';
import { createReadStream, lstatSync, mkdirSync, readFileSync, readdirSync, rmSync, statSync, type ReadStream } from 'node:fs';
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
 * How old a temporary upload file must be (since its last write) before an opening store removes it: 1 hour.
 * An upload in progress writes its file as bytes arrive and is cut at its declared size; Node's HTTP server
 * ends any request after its requestTimeout (300 s by default), so a live upload's file is never this old.
 */
export const TMP_SWEEP_AGE_MS = 3_600_000;

export interface BlobStoreOptions {
  /** The present, for the sweep of old temporary files (default Date.now). */
  nowMs?: () => number;
  /** Temporary files last written at least this long ago are removed at open (default TMP_SWEEP_AGE_MS). */
  tmpSweepAgeMs?: number;
}

/**
 * Removes from `tmp/` what uploads cut by a crash left behind, and only that: files last written at least
 * `ageMs` ago. Replicas may share the folder, and one starting must not delete another's upload in progress.
 * A file another replica removes meanwhile is skipped. Returns the names removed.
 */
export function sweepTmp(tmpDir: string, nowMs: number, ageMs: number): string[] {
  const removed: string[] = [];
  for (const name of readdirSync(tmpDir)) {
    const path = join(tmpDir, name);
    let mtimeMs: number;
    try {
      mtimeMs = lstatSync(path).mtimeMs;
    } catch {
      continue;
    }
    if (nowMs - mtimeMs < ageMs) continue;
    rmSync(path, { force: true, recursive: true });
    removed.push(name);
  }
  return removed;
}

/** Opens the store, creating its folders, and sweeps old temporary files (see sweepTmp). */
export function createBlobStore(dataDir: string, options: BlobStoreOptions = {}): BlobStore {
  const root = join(dataDir, 'blobs');
  const tmpDir = join(root, 'tmp');
  mkdirSync(join(root, 'sha256'), { recursive: true, mode: 0o700 });
  mkdirSync(tmpDir, { recursive: true, mode: 0o700 });
  sweepTmp(tmpDir, (options.nowMs ?? Date.now)(), options.tmpSweepAgeMs ?? TMP_SWEEP_AGE_MS);

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
