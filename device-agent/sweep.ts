import { readdirSync, rmSync } from 'node:fs';
import { join } from 'node:path';

/** Names a crash can leave behind: atomic-write temporaries (`x.tmp`, `x.tmp-<pid>`) and log rewrites (`x.rewrite`). */
const LEFTOVER = /\.(tmp(-\d+)?|rewrite)$/;

/**
 * Removes the temporary files an interrupted write left in the agent's folders (not partial weights
 * downloads, `<sha256>.part`, which are resumed). Returns the paths removed. A folder that does not exist is skipped.
 */
export function sweepTemporaryFiles(dirs: readonly string[]): string[] {
  const removed: string[] = [];
  for (const dir of dirs) {
    let names: string[];
    try {
      names = readdirSync(dir);
    } catch {
      continue;
    }
    for (const name of names) {
      if (!LEFTOVER.test(name)) continue;
      rmSync(join(dir, name), { force: true });
      removed.push(join(dir, name));
    }
  }
  return removed;
}
