import { useEffect, useState } from 'preact/hooks';
import { useLoad, useSession } from '../context.js';
import type { DeviceListItem, ReleaseSummary } from '../../../api-client/response-types.js';
import { ErrorNote } from '../ui/status.js';
import { parseWaves } from '../waves.js';

type TargetKind = 'class' | 'tags' | 'devices';

/** Start a rollout: which release, to which robots, in which waves, and what each wave must show before the next. */
export function RolloutForm({ releases, onStarted }: { releases: ReleaseSummary[]; onStarted: (id: string) => void }) {
  const { api } = useSession();
  const devices = useLoad(() => api.get<DeviceListItem[]>('/devices'), []);
  const [releaseId, setReleaseId] = useState('');
  const [kind, setKind] = useState<TargetKind>('class');
  const [tags, setTags] = useState('');
  const [chosen, setChosen] = useState<string[]>([]);
  const [waves, setWaves] = useState('1, 10%');
  const [applyTimeoutS, setApplyTimeoutS] = useState(600);
  const [telemetryFrames, setTelemetryFrames] = useState(300);
  const [latencyTolerancePct, setLatencyTolerancePct] = useState(25);
  const [offlineThen, setOfflineThen] = useState<'fail' | 'skip'>('fail');
  const [note, setNote] = useState('');
  const [error, setError] = useState<Error | null>(null);
  const [busy, setBusy] = useState(false);

  useEffect(() => {
    if (!releases.some((r) => r.id === releaseId) && releases[0]) setReleaseId(releases[0].id);
  }, [releases]);
  const release = releases.find((r) => r.id === releaseId);
  const ofClass = (devices.data ?? []).filter((d) => d.deviceClassId === release?.deviceClassId);
  const parsedWaves = parseWaves(waves);
  const tagList = tags.split(',').map((t) => t.trim()).filter(Boolean);
  const ready = release !== undefined && parsedWaves !== null && (kind !== 'devices' || chosen.length > 0) && (kind !== 'tags' || tagList.length > 0);

  async function submit(e: Event) {
    e.preventDefault();
    if (!ready || !release) return;
    setBusy(true);
    setError(null);
    const target = kind === 'devices' ? { deviceIds: chosen } : { deviceClassId: release.deviceClassId, tags: kind === 'tags' ? tagList : [] };
    try {
      const created = await api.send<{ id: string }>('POST', '/rollouts', {
        releaseId,
        target,
        waves: parsedWaves,
        gate: { applyTimeoutS, telemetryFrames, latencyTolerance: latencyTolerancePct / 100 },
        offline: { then: offlineThen },
        ...(note.trim() ? { note: note.trim() } : {}),
      });
      onStarted(created.id);
    } catch (err) {
      setError(err as Error);
    } finally {
      setBusy(false);
    }
  }

  return (
    <form class="panel" onSubmit={submit} aria-labelledby="new-rollout-title">
      <h3 id="new-rollout-title">Start a rollout</h3>
      <p class="hint">The first wave is one robot by default: watch it before the rest follow. A wave opens only when every robot of the one before applied the release and its measured latency stayed near the prediction.</p>
      <div class="filters">
        <div class="field">
          <label for="ro-release">Release</label>
          <select id="ro-release" value={releaseId} onChange={(e) => setReleaseId(e.currentTarget.value)}>
            {releases.map((r) => (
              <option value={r.id}>
                {r.id}
                {r.overridden ? ' (override)' : ''}
              </option>
            ))}
          </select>
        </div>
        <fieldset class="field inline-radios">
          <legend>Robots</legend>
          <label>
            <input type="radio" name="ro-kind" checked={kind === 'class'} onChange={() => setKind('class')} /> every {release?.deviceClassId ?? ''}
          </label>
          <label>
            <input type="radio" name="ro-kind" checked={kind === 'tags'} onChange={() => setKind('tags')} /> with tags
          </label>
          <label>
            <input type="radio" name="ro-kind" checked={kind === 'devices'} onChange={() => setKind('devices')} /> chosen ones
          </label>
        </fieldset>
        {kind === 'tags' && (
          <div class="field">
            <label for="ro-tags">Tags (all must match, comma-separated)</label>
            <input id="ro-tags" value={tags} onInput={(e) => setTags(e.currentTarget.value)} />
          </div>
        )}
        <div class="field">
          <label for="ro-waves">Waves (robots or %, comma-separated)</label>
          <input id="ro-waves" value={waves} aria-invalid={parsedWaves === null ? 'true' : undefined} onInput={(e) => setWaves(e.currentTarget.value)} />
          {parsedWaves === null && <span class="field-problem">Write sizes like “1, 10%, 50%”; the rest go in a last wave.</span>}
        </div>
      </div>
      {kind === 'devices' && (
        <fieldset class="device-picks">
          <legend>Robots of class {release?.deviceClassId}</legend>
          {ofClass.length === 0 && <p class="muted">No robots of this class are enrolled.</p>}
          {ofClass.map((d) => (
            <label class="pick">
              <input
                type="checkbox"
                checked={chosen.includes(d.id)}
                onChange={(e) => setChosen(e.currentTarget.checked ? [...chosen, d.id] : chosen.filter((x) => x !== d.id))}
              />{' '}
              {d.id} <span class="muted small">{d.online ? 'online' : 'offline'}</span>
            </label>
          ))}
        </fieldset>
      )}
      <details>
        <summary>Gate between waves</summary>
        <div class="filters">
          <div class="field">
            <label for="ro-apply">Apply within (s)</label>
            <input id="ro-apply" type="number" min={1} value={applyTimeoutS} onInput={(e) => setApplyTimeoutS(e.currentTarget.valueAsNumber || 600)} />
          </div>
          <div class="field">
            <label for="ro-frames">Frames measured before judging (0: skip)</label>
            <input id="ro-frames" type="number" min={0} value={telemetryFrames} onInput={(e) => setTelemetryFrames(Math.max(0, Math.round(e.currentTarget.valueAsNumber || 0)))} />
          </div>
          <div class="field">
            <label for="ro-tol">Latency off prediction by at most (%)</label>
            <input id="ro-tol" type="number" min={1} value={latencyTolerancePct} onInput={(e) => setLatencyTolerancePct(e.currentTarget.valueAsNumber || 25)} />
          </div>
          <div class="field">
            <label for="ro-offline">A robot that stays offline</label>
            <select id="ro-offline" value={offlineThen} onChange={(e) => setOfflineThen(e.currentTarget.value as 'fail' | 'skip')}>
              <option value="fail">stops the rollout</option>
              <option value="skip">is left out</option>
            </select>
          </div>
        </div>
      </details>
      <div class="field wide">
        <label for="ro-note">Note (optional)</label>
        <input id="ro-note" value={note} onInput={(e) => setNote(e.currentTarget.value)} />
      </div>
      <ErrorNote error={error} title="Rollout not started" />
      <div class="actions">
        <button type="submit" class="btn btn-primary" disabled={!ready || busy}>
          Start rollout
        </button>
      </div>
    </form>
  );
}
