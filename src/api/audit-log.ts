import type { Store } from '../store/store.js';

/** Records one change in the audit log; call inside the change's transaction so both land or neither does. */
export function recordChange(store: Store, entry: { at: string; actor: string; action: string; target: string; detail?: unknown }): void {
  store.audit.record({ ...entry, detail: entry.detail ?? null });
}
