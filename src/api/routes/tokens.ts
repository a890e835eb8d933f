import { actorOf } from '../auth.js';
import { issueToken, revokeToken } from '../../access/api-tokens.js';
import type { ResolvedDeps } from '../context.js';
import { badRequest } from '../errors.js';
import { unwrap } from '../refusals.js';
import { auditQuerySchema, tokenRequestSchema } from '../request-schemas.js';
import { requestBody, requestQuery, type Router } from '../routing.js';

/** API tokens (admin) and the audit log. */
export function registerTokenAndAuditRoutes(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;

  route('tokens.create', async (c) => {
    const body = requestBody(c, tokenRequestSchema);
    const created = issueToken(body, { store, actor: actorOf(c), at: deps.clock.now().toISOString() });
    return c.json({ token: created.token, secret: created.secret }, 201);
  });

  route('tokens.list', (c) => c.json(store.tokens.list()));

  route('tokens.revoke', (c) => {
    const raw = c.req.param('id') ?? '';
    const id = Number(raw);
    if (!/^\d{1,15}$/.test(raw)) throw badRequest('token ids are whole numbers', [{ path: 'id', message: `got '${raw}'` }]);
    return c.json(unwrap(revokeToken(id, { store, actor: actorOf(c), at: deps.clock.now().toISOString() })));
  });

  route('audit', (c) => {
    const q = requestQuery(c, auditQuerySchema);
    // Stored times are UTC ISO strings, so the bounds are normalised to the same form before comparing.
    const iso = (t: string | undefined) => (t === undefined ? undefined : new Date(t).toISOString());
    const filter = Object.fromEntries(
      Object.entries({ actor: q.actor, action: q.action, target: q.target, from: iso(q.from), to: iso(q.to), limit: q.limit }).filter(([, v]) => v !== undefined),
    );
    return c.json(store.audit.query(filter));
  });
}
