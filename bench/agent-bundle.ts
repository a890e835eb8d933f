// Bundles device-agent/main.ts into one ES module with esbuild, so the measured agent process carries
// no TypeScript loader (tsx compiles on the fly, which costs start-up time and memory a device would not pay).
import { join } from 'node:path';
import { build, type Plugin } from 'esbuild';

/**
 * V8 settings for a small device: a 1 MiB young generation (instead of 16 MiB semi-spaces that fill with
 * short-lived request and message objects) and no optimising compiler, whose code and metadata the
 * agent's brief bursts of work do not repay.
 */
export const AGENT_NODE_FLAGS = ['--max-semi-space-size=1', '--lite-mode'];

/**
 * Modules the agent never reaches, replaced by empty ones: zod's translated error messages (the agent
 * reports in English), and mqtt's SOCKS proxy transport (it connects over TCP/TLS). `ws` stays: the ROS 2
 * task source reaches rosbridge through it.
 */
const UNUSED = /^socks$|zod\/v4\/locales\/index\.js$/;

const leaveOut: Plugin = {
  name: 'leave-out-unused',
  setup(b) {
    b.onResolve({ filter: /^socks$|locales\/index\.js$/ }, (args) => {
      const full = args.path.startsWith('.') ? join(args.resolveDir, args.path) : args.path;
      return UNUSED.test(full) ? { path: full, namespace: 'unused' } : undefined;
    });
    b.onLoad({ filter: /.*/, namespace: 'unused' }, () => ({ contents: 'module.exports = {};', loader: 'js' }));
  },
};

export async function bundleAgent(outDir: string, root: string): Promise<string> {
  const outfile = join(outDir, 'ocellus-agent.mjs');
  await build({
    entryPoints: [join(root, 'device-agent/main.ts')],
    outfile,
    bundle: true,
    platform: 'node',
    target: 'node20',
    format: 'esm',
    minify: true,
    logLevel: 'error',
    plugins: [leaveOut],
    // CommonJS dependencies inside an ES module bundle need a require.
    banner: { js: "import { createRequire as __ocellusRequire } from 'node:module'; const require = __ocellusRequire(import.meta.url);" },
  });
  return outfile;
}
