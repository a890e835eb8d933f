// Entry point of `npm run prepare` (run by npm install): builds the web console into dist/console.
// Without vite (npm install --omit=dev) it says how to build the console later instead of failing the install;
// a build that does fail still fails the install, so a broken console is never shipped silently.
import { createRequire } from 'node:module';
import { fileURLToPath } from 'node:url';

const require = createRequire(import.meta.url);
try {
  require.resolve('vite/package.json');
} catch {
  process.stderr.write('ocellus: vite is not installed (development dependencies skipped?); the web console was not built. Build it with: npm install && npm run build:console\n');
  process.exit(0);
}
const { build } = await import('vite');
await build({ configFile: fileURLToPath(new URL('./vite.config.ts', import.meta.url)), logLevel: 'warn' });
