import { ROLES, type Role } from '../store/tokens.js';

/** Who may call a route: anyone, a token of at least a role, or (weights downloads) a viewer token or a device. */
export type Access = 'public' | Role | 'viewer-or-device';

const RANK: Record<Role, number> = Object.fromEntries(ROLES.map((r, i) => [r, i])) as Record<Role, number>;

/** Roles are ordered: viewer < engineer < operator < admin; each may do everything the lower ones may. */
export function roleAtLeast(role: Role, required: Role): boolean {
  return RANK[role] >= RANK[required];
}

export { ROLES, type Role };
