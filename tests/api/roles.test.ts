import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ROUTES } from '../../src/api/index.js';
import { ROLES, type Role } from '../../src/store/index.js';
import { createHarness, removeDir, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
beforeAll(() => {
  h = createHarness(tempDataDir());
});
afterAll(() => {
  h.closeStore();
  removeDir(h.dir);
});

const concrete = (path: string) => path.replace(':revision', '1').replace(/:[a-z]+/g, 'x');
const protectedRoutes = ROUTES.filter((r) => r.access !== 'public');
const mutating = ROUTES.filter((r) => r.mutates);

describe('role matrix (from the route table)', () => {
  it('declares a role of engineer or above on every route that changes state', () => {
    expect(mutating.length).toBeGreaterThan(15);
    for (const r of mutating) expect(['engineer', 'operator', 'admin'], r.key).toContain(r.access);
  });

  it.each(protectedRoutes.map((r) => [r.key, r] as const))('%s: no token gives 401, an unknown token 401', async (_key, r) => {
    const body = r.method === 'get' ? undefined : {};
    const none = await h.call(r.method.toUpperCase(), concrete(r.path), { token: null, body });
    expect(none.status).toBe(401);
    expect(((await none.json()) as { error: string }).error).toMatch(/authorization required/);
    const unknown = await h.call(r.method.toUpperCase(), concrete(r.path), { token: 'ocl_not-a-token', body });
    expect(unknown.status).toBe(401);
  });

  it.each(mutating.map((r) => [r.key, r.access, r] as const))('%s needs %s: every lower role gets 403 and nothing is written', async (_key, access, r) => {
    const lower = ROLES.slice(0, ROLES.indexOf(access as Role));
    expect(lower.length).toBeGreaterThan(0);
    const auditBefore = h.store.audit.query().length;
    for (const role of lower) {
      const res = await h.call(r.method.toUpperCase(), concrete(r.path), { token: h.tokens[role], body: {} });
      expect(res.status, `${role} on ${r.key}`).toBe(403);
    }
    expect(h.store.audit.query().length).toBe(auditBefore);
  });

  it.each(mutating.map((r) => [r.key, r.access, r] as const))('%s: the %s role itself passes authorization', async (_key, access, r) => {
    const res = await h.call(r.method.toUpperCase(), concrete(r.path), { token: h.tokens[access as Role], body: {} });
    expect([400, 404, 409]).toContain(res.status);
  });
});
