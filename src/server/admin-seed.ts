import type { Store } from '../store/store.js';

export type AdminSeed = 'stored' | 'already-present' | 'not-first-start' | 'not-given';

/** Shortest admin secret accepted from the environment; a bearer token must not be guessable. */
export const MIN_ADMIN_TOKEN_LENGTH = 24;

/**
 * Stores the given admin token secret (hashed) when the store has no tokens at all: the first start.
 * Later starts leave tokens alone, so a leaked environment variable cannot re-create a revoked token.
 */
export function seedAdminToken(store: Store, secret: string | undefined, at: string): AdminSeed {
  if (secret === undefined || secret === '') return 'not-given';
  if (secret.length < MIN_ADMIN_TOKEN_LENGTH || /\s/.test(secret)) {
    throw new RangeError(`the admin token must be at least ${MIN_ADMIN_TOKEN_LENGTH} characters without spaces`);
  }
  if (store.tokens.exists(secret)) return 'already-present';
  return store.transaction(() => {
    if (store.tokens.count() > 0) return 'not-first-start';
    const { token } = store.tokens.create({ role: 'admin', label: 'first-start admin', actor: 'server start', at, secret });
    store.audit.record({ at, actor: 'server start', action: 'token.create', target: `token/${token.id}`, detail: { role: 'admin', label: token.label, source: 'OCELLUS_ADMIN_TOKEN' } });
    return 'stored' as const;
  });
}
