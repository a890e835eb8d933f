import { Hono } from 'hono';
import { secureHeaders } from 'hono/secure-headers';
import { createMetricsRegistry, PROMETHEUS_CONTENT_TYPE } from '../metrics/registry.js';
import { createLoginGuard } from '../store/login-guard.js';
import { createChangeFeed } from './change-feed.js';
import type { AppDeps, AppEnv, ResolvedDeps } from './context.js';
import { DEFAULT_LIMITS } from './context.js';
import { registerCalibrationRoutes } from './routes/calibration.js';
import { registerDeviceRoutes } from './routes/devices.js';
import { registerDocumentRoutes } from './routes/documents.js';
import { createErrorHandler, type ErrorBody } from './errors.js';
import { createHttpMetrics } from './http-metrics.js';
import { openApiDocument } from './openapi.js';
import { registerPlanRoutes } from './routes/plan.js';
import { registerHistoryRoutes } from './routes/history.js';
import { registerProfileRoutes } from './routes/profiles.js';
import { registerRolloutRoutes } from './routes/rollouts.js';
import { registerReleaseRoutes } from './routes/releases.js';
import { createRouter } from './routing.js';
import { registerTokenAndAuditRoutes } from './routes/tokens.js';
import { registerWebRoutes } from './routes/web.js';
import { registerWeightsRoutes } from './routes/weights.js';

function reportToStderr(error: unknown): void {
  process.stderr.write(`ocellus: internal error: ${error instanceof Error ? (error.stack ?? error.message) : String(error)}\n`);
}

/**
 * Every response, the console's above all: scripts, styles and requests only from this server, no plugins,
 * never framed by another page (CSP frame-ancestors and X-Frame-Options for older browsers), no MIME
 * sniffing. HSTS is left to whoever puts the server behind TLS, since it binds the host name.
 */
const CONSOLE_SECURITY_HEADERS: Parameters<typeof secureHeaders>[0] = {
  contentSecurityPolicy: {
    defaultSrc: ["'self'"],
    scriptSrc: ["'self'"],
    styleSrc: ["'self'"],
    imgSrc: ["'self'", 'data:'],
    connectSrc: ["'self'"],
    objectSrc: ["'none'"],
    baseUri: ["'none'"],
    formAction: ["'self'"],
    frameAncestors: ["'none'"],
  },
  xFrameOptions: 'DENY',
  strictTransportSecurity: false,
};

/** The HTTP API under /api/v1, /metrics included. Every route comes from the route table (src/api/route-table.ts). */
export function createApp(deps: AppDeps): Hono<AppEnv> {
  const resolved: ResolvedDeps = {
    store: deps.store,
    blobs: deps.blobs,
    signer: deps.signer,
    clock: deps.clock ?? { now: () => new Date() },
    publisher: deps.publisher,
    metrics: deps.metrics ?? createMetricsRegistry(),
    limits: { ...DEFAULT_LIMITS, ...deps.limits },
    changes: deps.changes ?? createChangeFeed(),
    loginGuard: deps.loginGuard ?? createLoginGuard(deps.clock ? { clock: deps.clock } : {}),
    sessions: deps.sessions,
  };
  const app = new Hono<AppEnv>();
  app.use('*', createHttpMetrics(resolved.metrics, resolved.store));
  app.use('*', secureHeaders(CONSOLE_SECURITY_HEADERS));
  app.use('*', async function refuseBadPercentEncoding(c, next) {
    // A malformed escape (a lone '%', a cut UTF-8 sequence) is the client's error: say so before any route guesses.
    try {
      decodeURIComponent(new URL(c.req.url).pathname);
    } catch {
      return c.json({ error: 'bad percent-encoding in the URL', issues: [{ path: 'url', message: new URL(c.req.url).pathname }] } satisfies ErrorBody, 400);
    }
    return next();
  });
  app.onError(createErrorHandler(deps.onError ?? reportToStderr));
  app.notFound((c) => c.json({ error: `no route ${c.req.method} ${c.req.path}`, issues: [] } satisfies ErrorBody, 404));

  const route = createRouter(app, resolved, resolved.limits.maxJsonBytes);
  // First: its middleware announces every successful change made through the routes registered after it.
  registerWebRoutes(app, route, resolved, deps.consoleDir);
  registerDocumentRoutes(route, resolved, 'device-classes');
  registerDocumentRoutes(route, resolved, 'networks');
  registerDocumentRoutes(route, resolved, 'tasks');
  registerDocumentRoutes(route, resolved, 'models');
  registerWeightsRoutes(route, resolved);
  registerProfileRoutes(route, resolved);
  registerPlanRoutes(route, resolved);
  registerReleaseRoutes(route, resolved);
  registerDeviceRoutes(route, resolved);
  registerRolloutRoutes(route, resolved);
  registerHistoryRoutes(route, resolved);
  registerCalibrationRoutes(route, resolved);
  registerTokenAndAuditRoutes(route, resolved);
  const openapi = openApiDocument();
  route('openapi', (c) => c.json(openapi));
  route('metrics', (c) => c.body(resolved.metrics.render(), 200, { 'Content-Type': PROMETHEUS_CONTENT_TYPE }));

  const missing = route.missing();
  if (missing.length > 0) throw new Error(`routes in the table without a handler: ${missing.join(', ')}`);
  return app;
}
