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

import { METRIC_NAMES } from '../../metrics/registry.js';
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

  // Streams open per token: one viewer's page (or script) cannot hold every stream the server allows.
  const streamsPerToken = new Map<number, number>();
  const refusedStreams = deps.metrics.counter(METRIC_NAMES.eventStreamsRefused, 'Event streams refused, by reason');
  const revokeRoute = `${API_BASE}/tokens/:id/revoke`;

  route('events.stream', (c) => {
    const principal = c.get('principal');
    if (principal?.kind !== 'token') throw new HttpError(401, 'authorization required: send a bearer token');
    const tokenId = principal.token.id;
    const { maxEventStreams, maxEventStreamsPerToken } = deps.limits;
    if (changes.listenerCount() >= maxEventStreams) {
      refusedStreams.inc({ reason: 'server-limit' });
      throw new HttpError(503, `too many open event streams (${maxEventStreams})`);
    }
    const mine = streamsPerToken.get(tokenId) ?? 0;
    if (mine >= maxEventStreamsPerToken) {
      refusedStreams.inc({ reason: 'token-limit' });
      throw new HttpError(429, `this token already has ${mine} open event streams (at most ${maxEventStreamsPerToken}); close one first`);
    }
    streamsPerToken.set(tokenId, mine + 1);
    return streamSSE(c, async function streamChanges(stream) {
      let nextId = 1;
      let closed = false;
      let end = () => {};
      const ended = new Promise<void>((resolve) => (end = resolve));
      /** A revoked token's stream ends at once: checked when a token is revoked, and at every heartbeat. */
      const endIfRevoked = () => {
        if (deps.store.tokens.get(tokenId)?.revokedAt != null) end();
      };
      const send = (event: string, data: unknown) => {
        if (closed) return;
        stream.writeSSE({ event, id: String(nextId++), data: JSON.stringify(data) }).catch(() => {
          closed = true;
        });
      };
      const stop = changes.subscribe((change) => {
        if (change.kind === 'api' && change.route === revokeRoute) endIfRevoked();
        send('change', change);
      });
      send('hello', { at: deps.clock.now().toISOString() });
      const heartbeat = setInterval(() => {
        endIfRevoked();
        send('heartbeat', {});
      }, HEARTBEAT_MS);
      stream.onAbort(end);
      try {
        await ended;
      } finally {
        closed = true;
        clearInterval(heartbeat);
        stop();
        const left = (streamsPerToken.get(tokenId) ?? 1) - 1;
        if (left > 0) streamsPerToken.set(tokenId, left);
        else streamsPerToken.delete(tokenId);
      }
    });
  });

  registerDeviceEventsRoute(route, deps);

  const assets = createConsoleAssets(consoleDir);
  app.get('/', assets.index);
  app.get('/index.html', assets.index);
  app.get('/assets/*', assets.asset);
}
