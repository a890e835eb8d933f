import { refuse, type Outcome } from '../schema/refusal.js';
import type { Role, TokenRecord } from '../store/tokens.js';
import type { Store } from '../store/store.js';

export type TokenRefusalCode = 'token-not-found';

export interface TokenChangeContext {
  store: Store;
  actor: string;
  at: string;
}

/** Issues an API token of a role; its secret is returned once and stored only as a hash. Audited. */
export function issueToken(input: { role: Role; label?: string | undefined }, ctx: TokenChangeContext): { token: TokenRecord; secret: string } {
  const { store, actor, at } = ctx;
  return store.transaction(() => {
    const created = store.tokens.create({ role: input.role, label: input.label ?? `${input.role} token`, actor, at });
    store.audit.record({ at, actor, action: 'token.create', target: `token/${created.token.id}`, detail: { role: created.token.role, label: created.token.label } });
    return created;
  });
}

/** Revokes a token; revoking it again keeps the first time and writes no second audit entry. */
export function revokeToken(id: number, ctx: TokenChangeContext): Outcome<TokenRecord, TokenRefusalCode> {
  const { store, actor, at } = ctx;
  return store.transaction(() => {
    const before = store.tokens.get(id);
    const after = before ? store.tokens.revoke(id, at) : null;
    if (!before || !after) return refuse('token-not-found', `token ${id} not found`);
    if (before.revokedAt === null) {
      store.audit.record({ at, actor, action: 'token.revoke', target: `token/${id}`, detail: { role: before.role, label: before.label } });
    }
    return { ok: true as const, value: after };
  });
}
