import { useState } from 'preact/hooks';
import { useLiveChanges, useLoad, useSession } from '../context.js';
import { dateTime } from '../format.js';
import type { AuditEntry } from '../types.js';
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

function detailText(detail: unknown): string {
  if (detail === null || detail === undefined) return '';
  return JSON.stringify(detail);
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
          <table class="grid compact" aria-label="Audit log">
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
                  <td class="nowrap">{dateTime(a.at)}</td>
                  <td>{a.actor}</td>
                  <td>
                    <code>{a.action}</code>
                  </td>
                  <td>
                    <code>{a.target}</code>
                  </td>
                  <td class="detail">
                    <code>{detailText(a.detail)}</code>
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
