import { fileURLToPath } from 'node:url';
import { defineConfig } from 'vite';

/** Where `npm run build:console` (and `prepare`) writes the console; the server reads it from here by default. */
export const CONSOLE_OUT_DIR = fileURLToPath(new URL('../../dist/console/', import.meta.url));

/** The web console: plain TypeScript and preact, bundled into a few local files (no CDN: sites are often offline). */
export default defineConfig({
  root: fileURLToPath(new URL('./client/', import.meta.url)),
  base: '/',
  logLevel: 'warn',
  publicDir: false,
  oxc: { jsx: { runtime: 'automatic', importSource: 'preact' } },
  build: {
    outDir: CONSOLE_OUT_DIR,
    emptyOutDir: true,
    target: 'es2022',
    assetsInlineLimit: 0,
    reportCompressedSize: false,
  },
});
