import { readFile, stat } from 'node:fs/promises';
import { extname, join, normalize, sep } from 'node:path';
import type { Context } from 'hono';
import { isConsoleBuilt } from './console-dir.js';

const CONTENT_TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.svg': 'image/svg+xml',
  '.png': 'image/png',
  '.woff2': 'font/woff2',
  '.json': 'application/json',
};

/** Sent when the bundle is missing, e.g. after `npm install --ignore-scripts`. */
const NOT_BUILT_PAGE = `<!doctype html><html lang="en"><meta charset="utf-8"><title>Ocellus console not built</title>
<body style="font:16px system-ui;margin:2rem;max-width:40rem"><h1>The console is not built</h1>
<p>This server found no console bundle. Build it once with <code>npm run build:console</code> (npm install does this through its
<code>prepare</code> step unless scripts were skipped), then reload. The API under <code>/api/v1</code> works without it.</p></body></html>`;

/**
 * Serves the built console from a folder: `/` is index.html (never cached, so a new build shows at once),
 * `/assets/*` are content-hashed files (cached for a year). Paths are resolved inside the folder only.
 */
export function createConsoleAssets(bundleDir: string) {
  const root = normalize(bundleDir + sep);

  async function sendFile(c: Context, relative: string, cacheControl: string): Promise<Response> {
    const full = normalize(join(root, relative));
    if (!full.startsWith(root)) return c.text('not found', 404);
    try {
      const info = await stat(full);
      if (!info.isFile()) return c.text('not found', 404);
      const body = await readFile(full);
      return c.body(new Uint8Array(body), 200, {
        'Content-Type': CONTENT_TYPES[extname(full)] ?? 'application/octet-stream',
        'Cache-Control': cacheControl,
        'X-Content-Type-Options': 'nosniff',
      });
    } catch {
      return c.text('not found', 404);
    }
  }

  return {
    index: async function serveIndex(c: Context): Promise<Response> {
      if (!isConsoleBuilt(root)) return c.html(NOT_BUILT_PAGE, 503, { 'Cache-Control': 'no-store' });
      return sendFile(c, 'index.html', 'no-cache');
    },
    asset: async function serveAsset(c: Context): Promise<Response> {
      let relative: string;
      try {
        relative = decodeURIComponent(c.req.path).replace(/^\/+/, '');
      } catch {
        // A lone or malformed percent sign (/assets/%) is the client's mistake, not a fault of the server.
        return c.json({ error: 'bad percent-encoding in the URL', issues: [{ path: 'url', message: c.req.path }] }, 400);
      }
      return sendFile(c, relative, 'public, max-age=31536000, immutable');
    },
  };
}
