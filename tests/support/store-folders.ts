/**
 * Stores on the backend under test (a real SQLite file, or a real PostgreSQL database) with temporary data folders, closed and removed after each test. Registers its own
 * afterEach, so a test file calls it once at the top.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach } from 'vitest';
import type { Store } from '../../src/store/index.js';
import { openTestStore } from './store-backend.js';

export interface StoreFolders {
  /** A new empty folder (`ocellus-<prefix>-…` under the system's temporary folder). */
  tempDir(): string;
  /** Opens the store in `dir`; a test may close it itself, and open the folder again. */
  open(dir: string): Store;
}

export function storeFolders(prefix: string): StoreFolders {
  const dirs: string[] = [];
  const stores: Store[] = [];
  afterEach(() => {
    for (const s of stores.splice(0)) s.close();
    for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
  });
  return {
    tempDir() {
      const d = mkdtempSync(join(tmpdir(), `ocellus-${prefix}-`));
      dirs.push(d);
      return d;
    },
    open(dir) {
      const s = openTestStore(dir);
      stores.push(s);
      return s;
    },
  };
}
