import { fileURLToPath } from 'node:url';

const CONFIG_FILE = fileURLToPath(new URL('../vite.config.ts', import.meta.url));

/**
 * Builds the console with vite into `outDir` (the config's own folder when omitted). Tests build into a
 * temporary folder so they never run against a stale bundle. vite is a development dependency: this is
 * for builds and tests, never called by a running server.
 */
export async function buildConsole(outDir?: string): Promise<void> {
  const { build } = await import('vite');
  await build({
    configFile: CONFIG_FILE,
    logLevel: 'warn',
    ...(outDir !== undefined ? { build: { outDir, emptyOutDir: true } } : {}),
  });
}
