import type { Context, Hono } from 'hono';
import { authorize, type AuthDeps } from './auth.js';
import type { AppEnv } from './context.js';
import { ROUTES, routeSpec } from './route-table.js';

export type RouteHandler = (c: Context<AppEnv>) => Response | Promise<Response>;

export interface Router {
  /** Registers the handler of a route of the table; the table's access rule is enforced before it runs. */
  (key: string, handler: RouteHandler): void;
  /** Keys of table routes that have no handler yet (the app refuses to start with any). */
  missing(): string[];
}

export function createRouter(app: Hono<AppEnv>, deps: AuthDeps): Router {
  const registered = new Set<string>();
  const route = function route(key: string, handler: RouteHandler) {
    const spec = routeSpec(key);
    if (registered.has(key)) throw new Error(`route ${key} registered twice`);
    registered.add(key);
    app.on(spec.method.toUpperCase(), spec.path, async function handleRoute(c) {
      c.set('route', spec.path);
      c.set('principal', await authorize(c, spec.access, deps));
      return handler(c);
    });
  } as Router;
  route.missing = function missing() {
    return ROUTES.filter((r) => !registered.has(r.key)).map((r) => r.key);
  };
  return route;
}
