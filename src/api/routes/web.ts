import type { Hono } from 'hono';
import { streamSSE } from 'hono/streaming';
import { createConsoleAssets } from '../../web/server/console-assets.js';
import { DEFAULT_CONSOLE_DIR } from '../../web/server/console-dir.js';
import type { AppEnv, ResolvedDeps } from '../context.js';
import { registerDeviceEventsRoute } from './device-events.js';
import { HttpError } from '../errors.js';
import { roleAtLeast } from '../roles.js';
import { ROUTES, API_BASE } from '../route-table.js';
import type { Router } from '../routing.js';

/** Open event streams beyond this are refused (503), so a misbehaving page cannot pile them up. */
const MAX_EVENT_STREAMS = 200;
/** A comment-free heartbeat keeps proxies from closing a quiet stream. */
const HEARTBEAT_MS = 25_000;

/**
 * What the web console needs beside the API: who the caller is (`whoami`, with the route keys its role
 * may call, so the page shows only the buttons it may use), a server-sent-event stream of fleet changes,
 * a notification for every successful change made through the API, and the console bundle itself on `/`.
 * Register before the other routes: the notifying middleware has to wrap them.
 */
export function registerWebRoutes(app: Hono<AppEnv>, route: Router, deps: ResolvedDeps, consoleDir: string = DEFAULT_CONSOLE_DIR): void {
  const { changes } = deps;

  app.use(`${API_BASE}/*`, async function notifyChanges(c, next) {
    await next();
    const method = c.req.method;
    if (method === 'GET' || method === 'HEAD' || method === 'OPTIONS' || c.res.status >= 400) return;
    changes.publish({ kind: 'api', method, route: c.get('route') ?? c.req.path, path: c.req.path });
  });

  route('whoami', (c) => {
    const principal = c.get('principal');
    if (principal?.kind !== 'token') throw new HttpError(401, 'authorization required: send a bearer token');
    const { token } = principal;
    const allowed = ROUTES.filter((r) => {
      if (r.access === 'public') return true;
      return roleAtLeast(token.role, r.access === 'viewer-or-device' ? 'viewer' : r.access);
    }).map((r) => r.key);
    return c.json({ id: token.id, label: token.label, role: token.role, actor: principal.actor, allowed });
  });

  route('events.stream', (c) => {
    if (changes.listenerCount() >= MAX_EVENT_STREAMS) throw new HttpError(503, `too many open event streams (${MAX_EVENT_STREAMS})`);
    return streamSSE(c, async function streamChanges(stream) {
      let nextId = 1;
      let closed = false;
      const send = (event: string, data: unknown) => {
        if (closed) return;
        stream.writeSSE({ event, id: String(nextId++), data: JSON.stringify(data) }).catch(() => {
          closed = true;
        });
      };
      const stop = changes.subscribe((change) => send('change', change));
      send('hello', { at: deps.clock.now().toISOString() });
      const heartbeat = setInterval(() => send('heartbeat', {}), HEARTBEAT_MS);
      await new Promise<void>((resolve) => stream.onAbort(resolve));
      closed = true;
      clearInterval(heartbeat);
      stop();
    });
  });

  registerDeviceEventsRoute(route, deps);

  const assets = createConsoleAssets(consoleDir);
  app.get('/', assets.index);
  app.get('/index.html', assets.index);
  app.get('/assets/*', assets.asset);
}
