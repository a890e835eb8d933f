import { closeSync, fsyncSync, openSync, readFileSync, renameSync, writeSync } from 'node:fs';
import { open, rename } from 'node:fs/promises';
import { dirname } from 'node:path';

function fsyncDir(dir: string): void {
  const fd = openSync(dir, 'r');
  try {
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
}

/**
 * Replaces a file so that a crash leaves either the old or the new content, never a mix:
 * write a temporary file, fsync it, rename it over the old one, fsync the folder (POSIX rename is atomic).
 */
export function writeFileAtomicSync(path: string, content: string | Uint8Array): void {
  const temp = `${path}.tmp-${process.pid}`;
  const fd = openSync(temp, 'w');
  try {
    writeSync(fd, typeof content === 'string' ? Buffer.from(content, 'utf8') : content);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  renameSync(temp, path);
  fsyncDir(dirname(path));
}

/** The same as writeFileAtomicSync, without blocking the event loop. */
export async function writeFileAtomic(path: string, content: string | Uint8Array): Promise<void> {
  const temp = `${path}.tmp-${process.pid}`;
  const handle = await open(temp, 'w');
  try {
    await handle.writeFile(content);
    await handle.sync();
  } finally {
    await handle.close();
  }
  await rename(temp, path);
  const dir = await open(dirname(path), 'r');
  try {
    await dir.sync();
  } finally {
    await dir.close();
  }
}

/** Parsed JSON of a file, or null when the file does not exist. Other errors (bad JSON, permissions) throw. */
export function readJsonIfExists(path: string): unknown {
  try {
    return JSON.parse(readFileSync(path, 'utf8'));
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw e;
  }
}
