import { useState } from 'preact/hooks';
import { useLiveChanges, useLoad, useSession } from '../context.js';
import { dateTime } from '../format.js';
import { href } from '../router.js';
import type { ReleaseSummary } from '../../../api-client/response-types.js';
import { ErrorNote, Loading, SafetyCaution } from '../ui/status.js';
import { ReleaseForm } from './release-form.js';
import { RolloutsPanel } from './rollouts.js';

const plural = (n: number, one: string, many: string) => `${n} ${n === 1 ? one : many}`;

/** "3 robots (1 offline), 4 assigned". */
function robotsText(r: NonNullable<ReleaseSummary['robots']>): string {
  const total = r.applied.online + r.applied.offline;
  return `${plural(total, 'robot', 'robots')}${r.applied.offline ? ` (${r.applied.offline} offline)` : ''}, ${r.assigned} assigned`;
}

/** Releases (signed, never changed) and the rollouts that carry them to robots in waves. */
export function ReleasesPage() {
  const { api, can } = useSession();
  const releases = useLoad(() => api.get<ReleaseSummary[]>('/releases'), []);
  const [created, setCreated] = useState<string | null>(null);
  useLiveChanges(releases.reload, (c) => c.kind === 'api' && c.path.startsWith('/api/v1/releases'));
  const list = [...(releases.data ?? [])].sort((a, b) => b.createdAt.localeCompare(a.createdAt));

  return (
    <section aria-labelledby="releases-title">
      <div class="page-head">
        <h1 id="releases-title">Releases &amp; rollouts</h1>
      </div>
      <SafetyCaution />
      <div class="two-col">
        <div>
          <h2>Releases</h2>
          <ErrorNote error={releases.error} title="Could not load releases" />
          {created && (
            <p class="note note-ok" role="status">
              Release <code>{created}</code> created and signed.
            </p>
          )}
          {!releases.data ? (
            <Loading what="releases" />
          ) : (
            <div class="table-wrap">
              <table class="grid compact" aria-label="Releases">
                <thead>
                  <tr>
                    <th scope="col">Release</th>
                    <th scope="col">Class</th>
                    <th scope="col">Tasks (profile rev)</th>
                    <th scope="col">Apply policy</th>
                    <th scope="col">Robots running it</th>
                    <th scope="col">Created</th>
                  </tr>
                </thead>
                <tbody>
                  {list.map((r) => (
                    <tr data-release={r.id}>
                      <th scope="row">
                        <code>{r.id}</code>
                        {r.overridden && (
                          <span class="badge badge-warn" title="Released with failing checks under an override">
                            <span aria-hidden="true" class="badge-icon">!</span>override
                          </span>
                        )}
                      </th>
                      <td>{r.deviceClassId}</td>
                      <td>
                        <ul class="plain">
                          {Object.entries(r.tasks).map(([t, x]) => (
                            <li>
                              {t === r.defaultTask ? <strong>{t}</strong> : t}:{' '}
                              <a href={href({ page: 'profile', profileId: x.profileId })}>{x.profileId}</a> rev {x.revision}
                            </li>
                          ))}
                        </ul>
                      </td>
                      <td>{r.applyPolicy === 'when-idle' ? 'when idle' : 'at once'}</td>
                      <td data-robots={r.robots ? r.robots.applied.online + r.robots.applied.offline : ''}>
                        {r.robots ? robotsText(r.robots) : '—'}
                      </td>
                      <td>
                        {dateTime(r.createdAt)}
                        <div class="muted small">{r.createdBy}</div>
                      </td>
                    </tr>
                  ))}
                  {list.length === 0 && (
                    <tr>
                      <td colSpan={6} class="muted">
                        No releases yet.
                      </td>
                    </tr>
                  )}
                </tbody>
              </table>
            </div>
          )}
        </div>
        <div>
          {can('releases.create') && (
            <ReleaseForm
              onCreated={(id) => {
                setCreated(id);
                releases.reload();
              }}
            />
          )}
        </div>
      </div>
      <RolloutsPanel releases={list} />
    </section>
  );
}
