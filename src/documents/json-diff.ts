/** One field that differs between two JSON values. `before`/`after` are absent when the field was added/removed. */
export interface FieldChange {
  path: string;
  change: 'added' | 'removed' | 'changed';
  before?: unknown;
  after?: unknown;
}

function isPlainObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

function join(path: string, key: string | number): string {
  if (typeof key === 'number') return `${path}[${key}]`;
  return path ? `${path}.${key}` : key;
}

/**
 * Field-level differences between two JSON values, depth first, keys in sorted order. Objects are compared
 * key by key and arrays index by index; anything else (or a change of type) is one change at its path.
 */
export function diffJson(before: unknown, after: unknown, path = ''): FieldChange[] {
  if (isPlainObject(before) && isPlainObject(after)) {
    const keys = [...new Set([...Object.keys(before), ...Object.keys(after)])].sort();
    return keys.flatMap((k) => {
      const p = join(path, k);
      if (!Object.hasOwn(after, k)) return [{ path: p, change: 'removed' as const, before: before[k] }];
      if (!Object.hasOwn(before, k)) return [{ path: p, change: 'added' as const, after: after[k] }];
      return diffJson(before[k], after[k], p);
    });
  }
  if (Array.isArray(before) && Array.isArray(after)) {
    const n = Math.max(before.length, after.length);
    const out: FieldChange[] = [];
    for (let i = 0; i < n; i++) {
      const p = join(path, i);
      if (i >= after.length) out.push({ path: p, change: 'removed', before: before[i] });
      else if (i >= before.length) out.push({ path: p, change: 'added', after: after[i] });
      else out.push(...diffJson(before[i], after[i], p));
    }
    return out;
  }
  if (Object.is(before, after)) return [];
  return [{ path: path || '(root)', change: 'changed', before, after }];
}
