import { useEffect, useState } from 'preact/hooks';
import { useLiveChanges, useLoad, useSession } from '../context.js';
import { dateTime } from '../format.js';
import { href } from '../router.js';
import type { ReleaseSummary, RolloutDetail, RolloutDevice, RolloutSummary } from '../../../api-client/response-types.js';
import { ErrorNote, Loading } from '../ui/status.js';
import { RolloutForm } from './rollout-form.js';

const DEVICE_STATUS: Record<string, { icon: string; cls: string }> = {
  waiting: { icon: '…', cls: 'badge-other' },
  assigned: { icon: '⇢', cls: 'badge-info' },
  applied: { icon: '◐', cls: 'badge-info' },
  passed: { icon: '✓', cls: 'badge-pass' },
  failed: { icon: '✕', cls: 'badge-fail' },
  skipped: { icon: '–', cls: 'badge-other' },
};

const ROLLOUT_STATUS: Record<string, { icon: string; cls: string }> = {
  running: { icon: '▶', cls: 'badge-info' },
  paused: { icon: '⏸', cls: 'badge-warn' },
  completed: { icon: '✓', cls: 'badge-pass' },
  aborted: { icon: '■', cls: 'badge-fail' },
  'rolling-back': { icon: '↶', cls: 'badge-warn' },
  'rolled-back': { icon: '↶', cls: 'badge-other' },
};

function Badge({ status, table }: { status: string; table: Record<string, { icon: string; cls: string }> }) {
  const s = table[status] ?? { icon: '•', cls: 'badge-other' };
  return (
    <span class={`badge ${s.cls}`}>
      <span aria-hidden="true" class="badge-icon">
        {s.icon}
      </span>
      {status}
    </span>
  );
}

/** Why a rollout stopped: an operator's pause, or the devices that failed a wave's gate (src/fleet/rollout/engine.ts). */
function pauseText(reason: unknown): string | null {
  if (reason === null || reason === undefined || typeof reason !== 'object') return reason ? String(reason) : null;
  const r = reason as { kind?: string; by?: string; wave?: number; failures?: Array<{ deviceId: string; reason: string }> };
  if (r.kind === 'operator') return `paused by ${r.by ?? 'an operator'}`;
  if (r.kind === 'gate') {
    const list = (r.failures ?? []).map((f) => `${f.deviceId}: ${f.reason}`).join('; ');
    return `wave ${r.wave ?? '?'} failed its gate${list ? ` (${list})` : ''}`;
  }
  return JSON.stringify(reason);
}

function Waves({ detail }: { detail: RolloutDetail }) {
  const byWave = new Map<number, RolloutDevice[]>();
  for (const d of detail.devices) byWave.set(d.wave, [...(byWave.get(d.wave) ?? []), d]);
  return (
    <ol class="waves">
      {[...byWave.entries()]
        .sort(([a], [b]) => a - b)
        .map(([wave, devices]) => (
          <li class={wave === detail.currentWave ? 'wave current' : 'wave'}>
            <span class="wave-title">
              Wave {wave}
              {wave === detail.currentWave && detail.status === 'running' ? ' (open)' : ''}
            </span>
            <ul class="plain chips">
              {devices.map((d) => (
                <li data-rollout-device={d.deviceId} data-status={d.status} title={d.reason ?? undefined}>
                  <a href={href({ page: 'device', deviceId: d.deviceId })}>{d.deviceId}</a> <Badge status={d.status} table={DEVICE_STATUS} />
                  {d.rollbackStatus && <span class="muted small"> rollback: {d.rollbackStatus}</span>}
                  {d.reason && <div class="small muted">{d.reason}</div>}
                </li>
              ))}
            </ul>
          </li>
        ))}
    </ol>
  );
}

function RolloutCard({ summary, onChanged }: { summary: RolloutSummary; onChanged: () => void }) {
  const { api, can } = useSession();
  const detail = useLoad(() => api.get<RolloutDetail>(`/rollouts/${encodeURIComponent(summary.id)}`), [summary.id, summary.updatedAt]);
  const [error, setError] = useState<Error | null>(null);
  const [confirmRollback, setConfirmRollback] = useState(false);
  const act = async (verb: 'pause' | 'resume' | 'abort' | 'rollback') => {
    setError(null);
    try {
      await api.send('POST', `/rollouts/${encodeURIComponent(summary.id)}/${verb}`, {});
      setConfirmRollback(false);
      onChanged();
      detail.reload();
    } catch (err) {
      setError(err as Error);
    }
  };
  const s = summary.status;
  const reason = pauseText(summary.pauseReason);
  return (
    <article class="panel rollout" data-rollout={summary.id} aria-labelledby={`ro-${summary.id}`}>
      <header class="rollout-head">
        <h3 id={`ro-${summary.id}`}>
          Rollout <code>{summary.id}</code>
        </h3>
        <Badge status={s} table={ROLLOUT_STATUS} />
      </header>
      <p class="muted small">
        Release <code>{summary.releaseId}</code> · wave {summary.currentWave} of {summary.waveCount} · started {dateTime(summary.createdAt)} by {summary.createdBy}
      </p>
      {summary.spec?.note && (
        <p class="rollout-note" data-note>
          <strong>Note:</strong> {summary.spec.note}
        </p>
      )}
      {reason && (
        <p class="note note-warn">
          <strong>Stopped:</strong> {reason}
        </p>
      )}
      {detail.data?.rollback && (
        <p class="muted small">
          Roll back: {detail.data.rollback.restored} restored, {detail.data.rollback.pending} on their way, {detail.data.rollback.nothingToRestore} had nothing to go back to.
        </p>
      )}
      {detail.data ? <Waves detail={detail.data} /> : <Loading what="waves" />}
      <ErrorNote error={error ?? detail.error} />
      <div class="actions">
        {s === 'running' && can('rollouts.pause') && (
          <button type="button" class="btn" onClick={() => act('pause')}>
            Pause
          </button>
        )}
        {s === 'paused' && can('rollouts.resume') && (
          <button type="button" class="btn btn-primary" onClick={() => act('resume')}>
            Resume
          </button>
        )}
        {(s === 'running' || s === 'paused') && can('rollouts.abort') && (
          <button type="button" class="btn" onClick={() => act('abort')} title="Stop for good; robots keep what they have">
            Stop for good
          </button>
        )}
        {(s === 'running' || s === 'paused' || s === 'completed' || s === 'aborted') && can('rollouts.rollback') && !confirmRollback && (
          <button type="button" class="btn btn-danger" onClick={() => setConfirmRollback(true)}>
            Roll back…
          </button>
        )}
        {confirmRollback && (
          <span class="confirm" role="group" aria-label="Confirm roll back">
            Put every device of this rollout back on the release it had before?{' '}
            <button type="button" class="btn btn-danger" onClick={() => act('rollback')}>
              Yes, roll back
            </button>{' '}
            <button type="button" class="btn" onClick={() => setConfirmRollback(false)}>
              Keep it
            </button>
          </span>
        )}
      </div>
    </article>
  );
}

/** Rollouts, newest first, with their waves and gates; start, pause, resume and roll back as the role allows. */
export function RolloutsPanel({ releases }: { releases: ReleaseSummary[] }) {
  const { api, can } = useSession();
  const rollouts = useLoad(() => api.get<RolloutSummary[]>('/rollouts'), []);
  useLiveChanges(rollouts.reload);
  const [started, setStarted] = useState<string | null>(null);
  useEffect(() => {
    if (started) rollouts.reload();
  }, [started]);
  const list = [...(rollouts.data ?? [])].sort((a, b) => b.createdAt.localeCompare(a.createdAt));
  return (
    <section aria-labelledby="rollouts-title" class="rollouts">
      <h2 id="rollouts-title">Rollouts</h2>
      {can('rollouts.create') && <RolloutForm releases={releases} onStarted={setStarted} />}
      {started && (
        <p class="note note-ok" role="status">
          Rollout <code>{started}</code> started.
        </p>
      )}
      <ErrorNote error={rollouts.error} title="Could not load rollouts" />
      {!rollouts.data && !rollouts.error && <Loading what="rollouts" />}
      {rollouts.data && list.length === 0 && <p class="muted">No rollouts yet.</p>}
      {list.map((r) => (
        <RolloutCard summary={r} onChanged={rollouts.reload} />
      ))}
    </section>
  );
}
