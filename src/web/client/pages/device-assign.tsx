import { useState } from 'preact/hooks';
import { useLoad, useSession } from '../context.js';
import type { ReleaseSummary } from '../../../api-client/response-types.js';
import { ErrorNote } from '../ui/status.js';

/** Send one release to this one robot: the way to try a release on a single unit before a rollout. */
export function DeviceAssign({ deviceId, deviceClassId, onAssigned }: { deviceId: string; deviceClassId: string; onAssigned: () => void }) {
  const { api } = useSession();
  const releases = useLoad(() => api.get<ReleaseSummary[]>('/releases', { deviceClass: deviceClassId }), [deviceClassId]);
  const [releaseId, setReleaseId] = useState('');
  const [done, setDone] = useState<string | null>(null);
  const [error, setError] = useState<Error | null>(null);
  const list = [...(releases.data ?? [])].sort((a, b) => b.version - a.version);
  const chosen = releaseId || list[0]?.id || '';

  async function submit(e: Event) {
    e.preventDefault();
    setError(null);
    setDone(null);
    try {
      const r = await api.send<{ caution: string; publish?: unknown }>('POST', `/devices/${encodeURIComponent(deviceId)}/assign`, { releaseId: chosen });
      setDone(`Sent ${chosen}. ${r.caution}`);
      onAssigned();
    } catch (err) {
      setError(err as Error);
    }
  }

  if (list.length === 0) return null;
  return (
    <form class="panel inline-form" onSubmit={submit} aria-label="Send a release to this robot">
      <div class="field">
        <label for="assign-release">Send a release to this robot only</label>
        <select id="assign-release" value={chosen} onChange={(e) => setReleaseId(e.currentTarget.value)}>
          {list.map((r) => (
            <option value={r.id}>
              {r.id}
              {r.overridden ? ' (override)' : ''}
            </option>
          ))}
        </select>
      </div>
      <button type="submit" class="btn">
        Send
      </button>
      {done && (
        <p class="note note-ok" role="status">
          {done}
        </p>
      )}
      <ErrorNote error={error} title="Not sent" />
    </form>
  );
}
