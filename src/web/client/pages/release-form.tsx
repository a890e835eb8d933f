import { useEffect, useMemo, useState } from 'preact/hooks';
import { useLoad, useSession } from '../context.js';
import type { Check, DeviceClass, Revision, RevisionSummary, StoredDocument } from '../../../api-client/response-types.js';
import { ErrorNote, StatusBadge } from '../ui/status.js';

interface TaskChoice {
  include: boolean;
  profileId: string;
  revision: number;
}

/** A revision's status and, when it fails, its failing checks (read once per revision). */
function useRevisionVerdicts(picks: Array<{ profileId: string; revision: number }>) {
  const { api } = useSession();
  const key = picks.map((p) => `${p.profileId}@${p.revision}`).join(',');
  return useLoad(async () => {
    const out: Record<string, { status: string; failing: Check[] }> = {};
    await Promise.all(
      picks.map(async (p) => {
        const r = await api.get<Revision>(`/profiles/${encodeURIComponent(p.profileId)}/revisions/${p.revision}`);
        out[`${p.profileId}@${p.revision}`] = { status: r.status, failing: r.report.checks.filter((c) => c.status === 'fail') };
      }),
    );
    return out;
  }, [key]);
}

/** Build a release from stored profile revisions. A failing revision needs an override with a reason. */
export function ReleaseForm({ onCreated }: { onCreated: (releaseId: string) => void }) {
  const { api } = useSession();
  const classes = useLoad(() => api.get<Array<StoredDocument<DeviceClass>>>('/device-classes'), []);
  const profiles = useLoad(() => api.get<RevisionSummary[]>('/profiles'), []);
  const [deviceClassId, setDeviceClassId] = useState('');
  const [choices, setChoices] = useState<Record<string, TaskChoice>>({});
  const [revisionLists, setRevisionLists] = useState<Record<string, number[]>>({});
  const [defaultTask, setDefaultTask] = useState('');
  const [applyPolicy, setApplyPolicy] = useState<'when-idle' | 'immediate'>('when-idle');
  const [reason, setReason] = useState('');
  const [error, setError] = useState<Error | null>(null);
  const [busy, setBusy] = useState(false);

  useEffect(() => {
    if (!deviceClassId && classes.data?.[0]) setDeviceClassId(classes.data[0].id);
  }, [classes.data]);

  const forClass = useMemo(() => (profiles.data ?? []).filter((p) => p.profile.deviceClassId === deviceClassId), [profiles.data, deviceClassId]);
  const tasks = useMemo(() => [...new Set(forClass.map((p) => p.profile.taskId))].sort(), [forClass]);

  useEffect(() => {
    const next: Record<string, TaskChoice> = {};
    for (const t of tasks) {
      const first = forClass.find((p) => p.profile.taskId === t)!;
      next[t] = { include: true, profileId: first.profileId, revision: first.revision };
    }
    setChoices(next);
    setDefaultTask(tasks[0] ?? '');
  }, [deviceClassId, forClass]);

  async function loadRevisions(profileId: string) {
    if (revisionLists[profileId]) return;
    const list = await api.get<RevisionSummary[]>(`/profiles/${encodeURIComponent(profileId)}/revisions`);
    setRevisionLists((r) => ({ ...r, [profileId]: list.map((x) => x.revision) }));
  }
  useEffect(() => {
    for (const c of Object.values(choices)) void loadRevisions(c.profileId).catch(() => undefined);
  }, [choices]);

  const included = Object.entries(choices).filter(([, c]) => c.include);
  const verdicts = useRevisionVerdicts(included.map(([, c]) => ({ profileId: c.profileId, revision: c.revision })));
  const failing = included.filter(([, c]) => verdicts.data?.[`${c.profileId}@${c.revision}`]?.status === 'fail');
  const needsOverride = failing.length > 0;
  const ready = included.length > 0 && included.some(([t]) => t === defaultTask) && !verdicts.loading && (!needsOverride || reason.trim().length > 0);

  async function submit(e: Event) {
    e.preventDefault();
    if (!ready) return;
    setBusy(true);
    setError(null);
    try {
      const body = {
        deviceClassId,
        tasks: Object.fromEntries(included.map(([t, c]) => [t, { profileId: c.profileId, revision: c.revision }])),
        defaultTask,
        applyPolicy,
        ...(needsOverride ? { override: { reason: reason.trim() } } : {}),
      };
      const signed = await api.send<{ release: { id: string } }>('POST', '/releases', body);
      setReason('');
      onCreated(signed.release.id);
    } catch (err) {
      setError(err as Error);
    } finally {
      setBusy(false);
    }
  }

  const update = (task: string, patch: Partial<TaskChoice>) => setChoices((c) => ({ ...c, [task]: { ...c[task]!, ...patch } }));

  return (
    <form class="panel" onSubmit={submit} aria-labelledby="new-release-title">
      <h2 id="new-release-title">New release</h2>
      <div class="filters">
        <div class="field">
          <label for="rel-class">Device class</label>
          <select id="rel-class" value={deviceClassId} onChange={(e) => setDeviceClassId(e.currentTarget.value)}>
            {(classes.data ?? []).map((c) => (
              <option value={c.id}>{c.id}</option>
            ))}
          </select>
        </div>
        <div class="field">
          <label for="rel-default">Task at start</label>
          <select id="rel-default" value={defaultTask} onChange={(e) => setDefaultTask(e.currentTarget.value)}>
            {included.map(([t]) => (
              <option value={t}>{t}</option>
            ))}
          </select>
        </div>
        <fieldset class="field inline-radios">
          <legend>Robots apply it</legend>
          <label>
            <input type="radio" name="apply" checked={applyPolicy === 'when-idle'} onChange={() => setApplyPolicy('when-idle')} /> when idle (safe state)
          </label>
          <label>
            <input type="radio" name="apply" checked={applyPolicy === 'immediate'} onChange={() => setApplyPolicy('immediate')} /> at once
          </label>
        </fieldset>
      </div>
      {tasks.length === 0 && <p class="muted">No profiles are stored for this device class.</p>}
      <div class="table-wrap">
        <table class="grid compact" aria-label="Tasks in the release">
          <thead>
            <tr>
              <th scope="col">Include</th>
              <th scope="col">Task</th>
              <th scope="col">Profile</th>
              <th scope="col">Revision</th>
              <th scope="col">Checks</th>
            </tr>
          </thead>
          <tbody>
            {tasks.map((t) => {
              const c = choices[t];
              if (!c) return null;
              const v = verdicts.data?.[`${c.profileId}@${c.revision}`];
              return (
                <tr data-task={t}>
                  <td>
                    <input type="checkbox" id={`rel-inc-${t}`} checked={c.include} onChange={(e) => update(t, { include: e.currentTarget.checked })} />
                  </td>
                  <th scope="row">
                    <label for={`rel-inc-${t}`}>{t}</label>
                  </th>
                  <td>
                    <select
                      aria-label={`Profile for ${t}`}
                      value={c.profileId}
                      onChange={(e) => {
                        const p = forClass.find((x) => x.profileId === e.currentTarget.value)!;
                        update(t, { profileId: p.profileId, revision: p.revision });
                      }}
                    >
                      {forClass
                        .filter((p) => p.profile.taskId === t)
                        .map((p) => (
                          <option value={p.profileId}>{p.profileId}</option>
                        ))}
                    </select>
                  </td>
                  <td>
                    <select aria-label={`Revision of ${c.profileId}`} value={String(c.revision)} onChange={(e) => update(t, { revision: Number(e.currentTarget.value) })}>
                      {(revisionLists[c.profileId] ?? [c.revision]).map((r) => (
                        <option value={String(r)}>{r}</option>
                      ))}
                    </select>
                  </td>
                  <td>{c.include ? v ? <StatusBadge status={v.status} /> : <span class="muted">…</span> : <span class="muted">left out</span>}</td>
                </tr>
              );
            })}
          </tbody>
        </table>
      </div>
      {needsOverride && (
        <div class="note note-fail" role="alert">
          <strong>
            <span aria-hidden="true">✕ </span>
            {failing.length === 1 ? 'A chosen revision fails its checks.' : `${failing.length} chosen revisions fail their checks.`}
          </strong>{' '}
          A plain release is refused. Fix the profile, or release it anyway with an override: the reason is signed into the release and kept in the audit log.
          <ul>
            {failing.flatMap(([t, c]) =>
              (verdicts.data?.[`${c.profileId}@${c.revision}`]?.failing ?? []).map((ch) => (
                <li>
                  <strong>{t}</strong> ({c.profileId} rev {c.revision}): <code>{ch.code}</code> {ch.message}
                </li>
              )),
            )}
          </ul>
          <label for="rel-reason">Override reason (required)</label>
          <textarea id="rel-reason" rows={2} value={reason} onInput={(e) => setReason(e.currentTarget.value)} required />
        </div>
      )}
      <ErrorNote error={error} title="Release not created" />
      <div class="actions">
        <button type="submit" class={`btn ${needsOverride ? 'btn-danger' : 'btn-primary'}`} disabled={!ready || busy}>
          {needsOverride ? 'Create release with override' : 'Create release'}
        </button>
        {needsOverride && !reason.trim() && <span class="hint">Give the override reason to enable this button.</span>}
      </div>
    </form>
  );
}
