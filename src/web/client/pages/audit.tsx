import { useState } from 'preact/hooks';
import { useLiveChanges, useLoad, useSession } from '../context.js';
import { dateTime } from '../format.js';
import type { AuditEntry } from '../../../api-client/response-types.js';
import { ErrorNote, Loading } from '../ui/status.js';

interface Filter {
  actor: string;
  action: string;
  target: string;
  from: string;
  to: string;
  limit: string;
}

const EMPTY: Filter = { actor: '', action: '', target: '', from: '', to: '', limit: '200' };

/** datetime-local gives local time without a zone; the API wants an ISO time with one. */
function toIso(local: string): string | undefined {
  if (!local) return undefined;
  const d = new Date(local);
  return Number.isNaN(d.getTime()) ? undefined : d.toISOString();
}

/** A detail value in words: strings bare, records as "key: value" pairs, nested ones in parentheses. */
export function compact(value: unknown, depth = 0): string {
  if (value === null || value === undefined) return '—';
  if (typeof value !== 'object') return String(value);
  if (Array.isArray(value)) return value.map((v) => compact(v, depth + 1)).join(', ');
  const inner = Object.entries(value as Record<string, unknown>)
    .map(([k, v]) => `${k}: ${compact(v, depth + 1)}`)
    .join('; ');
  return depth === 0 ? inner : `(${inner})`;
}

function Detail({ detail }: { detail: unknown }) {
  if (detail === null || detail === undefined || typeof detail !== 'object') return <span>{compact(detail)}</span>;
  return (
    <dl class="detail-list">
      {Object.entries(detail as Record<string, unknown>)
        .filter(([, v]) => v !== null && v !== undefined)
        .map(([k, v]) => (
          <div>
            <dt>{k}</dt>
            <dd>{compact(v, 1).replace(/^\((.*)\)$/, '$1')}</dd>
          </div>
        ))}
    </dl>
  );
}

/** Every change anyone made, newest first, filtered by who, what, on what and when. */
export function AuditPage() {
  const { api } = useSession();
  const [draft, setDraft] = useState<Filter>(EMPTY);
  const [filter, setFilter] = useState<Filter>(EMPTY);
  const entries = useLoad(
    () =>
      api.get<AuditEntry[]>('/audit', {
        actor: filter.actor || undefined,
        action: filter.action || undefined,
        target: filter.target || undefined,
        from: toIso(filter.from),
        to: toIso(filter.to),
        limit: filter.limit || undefined,
      }),
    [filter],
  );
  useLiveChanges(entries.reload, (c) => c.kind === 'api');
  const field = (key: keyof Filter, label: string, type: 'text' | 'number' | 'datetime-local' = 'text') => (
    <div class="field">
      <label for={`audit-${key}`}>{label}</label>
      {/* preact types each input type apart; a union of them needs this narrowing */}
      <input id={`audit-${key}`} type={type as "text"} value={draft[key]} onInput={(e) => setDraft({ ...draft, [key]: e.currentTarget.value })} />
    </div>
  );

  return (
    <section aria-labelledby="audit-title">
      <div class="page-head">
        <h1 id="audit-title">Audit</h1>
        <p class="muted">Every change made through the API, newest first. Filters match exactly, as the API does.</p>
      </div>
      <form
        class="filters"
        aria-label="Filter the audit log"
        onSubmit={(e) => {
          e.preventDefault();
          setFilter(draft);
        }}
      >
        {field('actor', 'Who (actor)')}
        {field('action', 'Action, e.g. release.create')}
        {field('target', 'Target, e.g. profile/leaf-a')}
        {field('from', 'From', 'datetime-local')}
        {field('to', 'To', 'datetime-local')}
        {field('limit', 'At most', 'number')}
        <div class="actions">
          <button type="submit" class="btn btn-primary">
            Apply filters
          </button>
          <button
            type="button"
            class="btn"
            onClick={() => {
              setDraft(EMPTY);
              setFilter(EMPTY);
            }}
          >
            Clear
          </button>
        </div>
      </form>
      <ErrorNote error={entries.error} title="Could not load the audit log" />
      {!entries.data ? (
        <Loading what="the audit log" />
      ) : (
        <div class="table-wrap">
          <table class="grid compact audit-log" aria-label="Audit log">
            <thead>
              <tr>
                <th scope="col">When</th>
                <th scope="col">Who</th>
                <th scope="col">Action</th>
                <th scope="col">Target</th>
                <th scope="col">Detail</th>
              </tr>
            </thead>
            <tbody>
              {entries.data.map((a) => (
                <tr>
                  <td class="nowrap" data-label="When">{dateTime(a.at)}</td>
                  <td data-label="Who">{a.actor}</td>
                  <td class="nowrap" data-label="Action">
                    <code>{a.action}</code>
                  </td>
                  <td data-label="Target">
                    <code class="wrap-anywhere">{a.target}</code>
                  </td>
                  <td class="detail" data-label="Detail">
                    <Detail detail={a.detail} />
                  </td>
                </tr>
              ))}
              {entries.data.length === 0 && (
                <tr>
                  <td colSpan={5} class="muted">
                    Nothing matches these filters.
                  </td>
                </tr>
              )}
            </tbody>
          </table>
        </div>
      )}
    </section>
  );
}
