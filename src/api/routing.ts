import type { Context, Hono } from 'hono';
import type { z } from 'zod';
import { authorize, type AuthDeps } from './auth.js';
import { readJson, readQuery } from './body.js';
import type { AppEnv } from './context.js';
import { ROUTES, routeSpec } from './route-table.js';

export type RouteHandler = (c: Context<AppEnv>) => Response | Promise<Response>;

export interface Router {
  /** Registers the handler of a route of the table; the table's access rule is enforced before it runs. */
  (key: string, handler: RouteHandler): void;
  /** Keys of table routes that have no handler yet (the app refuses to start with any). */
  missing(): string[];
}

/**
 * Registers the table's routes: the access rule is enforced first, then the JSON body and the query are parsed
 * with the schemas the table declares for the route (400 naming each bad field), then the handler runs and
 * reads them with requestBody / requestQuery.
 */
export function createRouter(app: Hono<AppEnv>, deps: AuthDeps, maxJsonBytes: number): Router {
  const registered = new Set<string>();
  const route = function route(key: string, handler: RouteHandler) {
    const spec = routeSpec(key);
    if (registered.has(key)) throw new Error(`route ${key} registered twice`);
    registered.add(key);
    app.on(spec.method.toUpperCase(), spec.path, async function handleRoute(c) {
      c.set('route', spec.path);
      c.set('principal', await authorize(c, spec.access, deps));
      const request: NonNullable<AppEnv['Variables']['request']> = {};
      if (spec.query) Object.assign(request, { query: readQuery(c, spec.query), querySchema: spec.query });
      if (spec.body && !spec.binaryBody) Object.assign(request, { body: await readJson(c, spec.body, maxJsonBytes), bodySchema: spec.body });
      c.set('request', request);
      return handler(c);
    });
  } as Router;
  route.missing = function missing() {
    return ROUTES.filter((r) => !registered.has(r.key)).map((r) => r.key);
  };
  return route;
}

/** The route's JSON body as the router parsed it; `schema` must be the one the route table declares (checked). */
export function requestBody<S extends z.ZodType>(c: Context<AppEnv>, schema: S): z.infer<S> {
  const r = c.get('request');
  if (r?.bodySchema !== schema) throw new Error(`route ${c.get('route')}: the handler reads a body the route table does not declare with this schema`);
  return r.body as z.infer<S>;
}

/** The route's query as the router parsed it; `schema` must be the one the route table declares (checked). */
export function requestQuery<S extends z.ZodType>(c: Context<AppEnv>, schema: S): z.infer<S> {
  const r = c.get('request');
  if (r?.querySchema !== schema) throw new Error(`route ${c.get('route')}: the handler reads a query the route table does not declare with this schema`);
  return r.query as z.infer<S>;
}
