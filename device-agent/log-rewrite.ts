import { fdatasyncSync, renameSync, rmSync, writeSync } from 'node:fs';
import { open, type FileHandle } from 'node:fs/promises';
import { dirname } from 'node:path';

/** The slow disk step of a rewrite, handed in so a test can hold it (a slow SD card, say) and check who waits. */
export interface RewriteDisk {
  /** Flushes a file's data and metadata to the device (fsync). */
  sync(handle: FileHandle): Promise<void>;
}

export const systemDisk: RewriteDisk = {
  sync: (handle) => handle.sync(),
};

export interface LiveRewrite {
  /** The file to replace. */
  path: string;
  /** Content known when the rewrite starts. */
  head: string;
  /** Text appended to the live file since the last call ('' when nothing). */
  tail(): string;
  /** Runs in the same tick as the rename, so nothing is appended to the old file after it. */
  swapped(): void;
  /** True when the rewrite should stop (the log was closed); the temporary file is removed. */
  cancelled(): boolean;
  disk: RewriteDisk;
}

/** Rounds of asynchronous catch-up for the tail before the last, small part is flushed in the same tick as the rename. */
const TAIL_ROUNDS = 3;

async function syncFolder(path: string, disk: RewriteDisk): Promise<void> {
  const folder = await open(dirname(path), 'r');
  try {
    await disk.sync(folder);
  } finally {
    await folder.close();
  }
}

/**
 * Replaces a file that is still being appended to, without blocking the event loop on the disk:
 * write `head` to `<path>.rewrite`, fsync, copy over what was appended meanwhile (fsync again), then,
 * in one synchronous step, flush the last few lines, rename over `path` and call `swapped()`, and
 * finally fsync the folder. A crash at any point leaves the old file or the new one, each complete
 * (POSIX rename is atomic). Returns false when cancelled before the rename.
 */
export async function rewriteLiveFile(job: LiveRewrite): Promise<boolean> {
  const temp = `${job.path}.rewrite`;
  const handle = await open(temp, 'w');
  let renamed = false;
  try {
    await handle.writeFile(job.head);
    await job.disk.sync(handle);
    for (let round = 0; round < TAIL_ROUNDS && !job.cancelled(); round++) {
      const more = job.tail();
      if (!more) break;
      await handle.write(more);
      await job.disk.sync(handle);
    }
    if (job.cancelled()) return false;
    // From here to swapped() nothing awaits: no append can land in the old file unseen.
    const last = job.tail();
    if (last) {
      writeSync(handle.fd, last);
      fdatasyncSync(handle.fd);
    }
    renameSync(temp, job.path);
    renamed = true;
    job.swapped();
  } finally {
    await handle.close();
    if (!renamed) rmSync(temp, { force: true });
  }
  await syncFolder(job.path, job.disk);
  return true;
}

/**
 * Replaces a small file atomically without blocking: temporary file, fsync, rename, fsync of the
 * folder. The check of `cancelled` and the rename run in one tick, so a synchronous writer that
 * cancels first is never overwritten by this older content. Returns false when cancelled.
 */
export async function replaceSmallFile(path: string, content: string, cancelled: () => boolean, disk: RewriteDisk): Promise<boolean> {
  const temp = `${path}.rewrite`;
  const handle = await open(temp, 'w');
  let renamed = false;
  try {
    await handle.writeFile(content);
    await disk.sync(handle);
    if (cancelled()) return false;
    renameSync(temp, path);
    renamed = true;
  } finally {
    await handle.close();
    if (!renamed) rmSync(temp, { force: true });
  }
  await syncFolder(path, disk);
  return true;
}

/** Removes a temporary file a crash may have left behind (never read: the real file is complete). */
export function removeLeftover(path: string): void {
  rmSync(`${path}.rewrite`, { force: true });
}
