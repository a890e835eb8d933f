import { actorOf } from '../auth.js';
import { recordChange } from '../audit-log.js';
import type { ResolvedDeps } from '../context.js';
import { badRequest, notFound } from '../errors.js';
import { auditQuerySchema, tokenRequestSchema } from '../request-schemas.js';
import { requestBody, requestQuery, type Router } from '../routing.js';

/** API tokens (admin) and the audit log. */
export function registerTokenAndAuditRoutes(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;

  route('tokens.create', async (c) => {
    const body = requestBody(c, tokenRequestSchema);
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const created = store.transaction(() => {
      const t = store.tokens.create({ role: body.role, label: body.label ?? `${body.role} token`, actor, at });
      recordChange(store, { at, actor, action: 'token.create', target: `token/${t.token.id}`, detail: { role: t.token.role, label: t.token.label } });
      return t;
    });
    return c.json({ token: created.token, secret: created.secret }, 201);
  });

  route('tokens.list', (c) => c.json(store.tokens.list()));

  route('tokens.revoke', (c) => {
    const raw = c.req.param('id') ?? '';
    const id = Number(raw);
    if (!/^\d{1,15}$/.test(raw)) throw badRequest('token ids are whole numbers', [{ path: 'id', message: `got '${raw}'` }]);
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const revoked = store.transaction(() => {
      const before = store.tokens.get(id);
      if (!before) throw notFound(`token ${id}`);
      const after = store.tokens.revoke(id, at)!;
      if (before.revokedAt === null) {
        recordChange(store, { at, actor, action: 'token.revoke', target: `token/${id}`, detail: { role: before.role, label: before.label } });
      }
      return after;
    });
    return c.json(revoked);
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
