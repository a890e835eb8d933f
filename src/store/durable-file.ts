import { closeSync, fsyncSync, openSync, writeSync } from 'node:fs';
import { dirname } from 'node:path';

/**
 * Writes a new file that survives a power cut once this returns: the bytes are fsynced, then the folder
 * (so the new directory entry is on disk too; POSIX fsync(2) does not promise that for the file alone).
 * 'wx' refuses to overwrite a file another process wrote in the meantime: that throws EEXIST.
 */
export function writeFileDurably(path: string, data: string | Buffer, mode: number): void {
  const fd = openSync(path, 'wx', mode);
  try {
    const bytes = typeof data === 'string' ? Buffer.from(data, 'utf8') : data;
    let at = 0;
    while (at < bytes.length) at += writeSync(fd, bytes, at, bytes.length - at);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  syncFolder(dirname(path));
}

/** fsync of a folder, so entries created or renamed in it are durable. */
export function syncFolder(folder: string): void {
  const fd = openSync(folder, 'r');
  try {
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
}
