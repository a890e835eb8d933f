import { existsSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

/** The bundle `npm install` builds (the `prepare` script runs `npm run build:console`). */
export const DEFAULT_CONSOLE_DIR = fileURLToPath(new URL('../../../dist/console/', import.meta.url));

/** True when a folder holds a built console (its index.html). */
export function isConsoleBuilt(dir: string): boolean {
  return existsSync(join(dir, 'index.html'));
}
