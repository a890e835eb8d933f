import { existsSync, mkdirSync, readdirSync, renameSync, statSync, unlinkSync, utimesSync } from 'node:fs';
import { join } from 'node:path';
import { weightsPathByHash, type Release } from '../src/protocol/release.js';
import { downloadWithResume, OversizeError, sha256OfFile } from './weights-fetch.js';

/** The weights the server sent do not match the release (hash, size, or more bytes than declared): reported, and fetched again later. */
export class WeightsMismatchError extends Error {
  override readonly name = 'WeightsMismatchError';
}

export interface WeightsCacheOptions {
  dir: string;
  maxBytes: number;
  serverUrl: string;
  username: string;
  password: string;
  log?: (line: string) => void;
}

export interface WeightsCache {
  pathOf(sha256: string): string;
  has(sha256: string): boolean;
  /**
   * Makes every weights file of a release present and verified, downloading what is missing with
   * resume. Throws WeightsMismatchError when a file's sha256 or size is wrong even after a fresh
   * download, FetchError (or any other error) when the download did not finish.
   */
  ensure(release: Release): Promise<void>;
  /** Removes least recently used files until the cache fits its cap, never one in `keep`. */
  evict(keep: ReadonlySet<string>): void;
  usedBytes(): number;
}

const HEX64 = /^[0-9a-f]{64}$/;

/** Every distinct weights file a release needs. */
export function releaseWeights(release: Release): Array<Release['tasks'][string]['model']> {
  const bySha = new Map<string, Release['tasks'][string]['model']>();
  for (const task of Object.values(release.tasks)) bySha.set(task.model.sha256, task.model);
  return [...bySha.values()];
}

/**
 * Content-addressed weights on the device: `<dir>/<sha256>` for verified files, `<sha256>.part` for
 * downloads in progress. Recency of use is the file's modification time, refreshed on every use.
 */
export function createWeightsCache(options: WeightsCacheOptions): WeightsCache {
  mkdirSync(options.dir, { recursive: true });
  const log = options.log ?? (() => {});
  const pathOf = (sha256: string) => join(options.dir, sha256);

  function touch(path: string) {
    const now = new Date();
    utimesSync(path, now, now);
  }

  async function fetchOne(model: Release['tasks'][string]['model']): Promise<void> {
    const finalPath = pathOf(model.sha256);
    const partPath = `${finalPath}.part`;
    // By content, whatever path the release wrote: a release made before weights were named by hash still gets its own bytes.
    const path = weightsPathByHash(model);
    const url = new URL(path, options.serverUrl).toString();
    // A resumed download can join bytes of two different files; one fresh attempt tells that apart from bad weights.
    for (let attempt = 1; attempt <= 2; attempt++) {
      const resumed = existsSync(partPath);
      try {
        await downloadWithResume({ url, username: options.username, password: options.password, partPath, expectedBytes: model.sizeBytes });
      } catch (e) {
        if (!(e instanceof OversizeError)) throw e;
        if (existsSync(partPath)) unlinkSync(partPath);
        throw new WeightsMismatchError(`weights of model ${model.id} from ${path}: ${e.message} (the release says ${model.sha256}, ${model.sizeBytes} bytes)`);
      }
      const size = statSync(partPath).size;
      const actual = await sha256OfFile(partPath);
      if (actual === model.sha256 && size === model.sizeBytes) {
        renameSync(partPath, finalPath);
        return;
      }
      unlinkSync(partPath);
      const detail = `weights of model ${model.id} from ${path}: sha256 ${actual} (${size} bytes), the release says ${model.sha256} (${model.sizeBytes} bytes)`;
      if (!resumed || attempt === 2) throw new WeightsMismatchError(detail);
      log(`agent: ${detail}; downloading again from the start`);
    }
  }

  return {
    pathOf,
    has: (sha256) => existsSync(pathOf(sha256)),
    ensure: async function ensure(release) {
      for (const model of releaseWeights(release)) {
        const path = pathOf(model.sha256);
        if (existsSync(path)) touch(path);
        else await fetchOne(model);
      }
    },
    evict: function evict(keep) {
      const files = readdirSync(options.dir)
        .filter((name) => HEX64.test(name))
        .map((name) => {
          const s = statSync(join(options.dir, name));
          return { name, bytes: s.size, usedMs: s.mtimeMs };
        })
        .sort((a, b) => a.usedMs - b.usedMs);
      let total = files.reduce((sum, f) => sum + f.bytes, 0);
      for (const f of files) {
        if (total <= options.maxBytes) break;
        if (keep.has(f.name)) continue;
        unlinkSync(join(options.dir, f.name));
        total -= f.bytes;
        log(`agent: weights cache over ${options.maxBytes} bytes; removed ${f.name} (least recently used)`);
      }
    },
    usedBytes: function usedBytes() {
      return readdirSync(options.dir)
        .filter((name) => HEX64.test(name))
        .reduce((sum, name) => sum + statSync(join(options.dir, name)).size, 0);
    },
  };
}
