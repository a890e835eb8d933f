import { useEffect, useState } from 'preact/hooks';
import { useSession } from '../context.js';
import { dateTime } from '../format.js';
import type { FieldChange, RevisionSummary } from '../../../api-client/response-types.js';
import { ErrorNote, StatusBadge } from '../ui/status.js';

function show(v: unknown): string {
  return v === undefined ? '' : typeof v === 'string' ? v : JSON.stringify(v);
}

/** Every saved revision of a profile, and the field-level differences between any two. */
export function ProfileRevisions({ profileId, revisions }: { profileId: string; revisions: RevisionSummary[] }) {
  const { api } = useSession();
  const last = revisions.length;
  const [from, setFrom] = useState(Math.max(1, last - 1));
  const [to, setTo] = useState(last);
  const [diff, setDiff] = useState<{ from: number; to: number; changes: FieldChange[] } | null>(null);
  const [error, setError] = useState<Error | null>(null);
  useEffect(() => {
    setFrom(Math.max(1, last - 1));
    setTo(last);
  }, [last]);

  async function compare(e: Event) {
    e.preventDefault();
    setError(null);
    try {
      setDiff(await api.get(`/profiles/${encodeURIComponent(profileId)}/diff`, { from, to }));
    } catch (err) {
      setError(err as Error);
      setDiff(null);
    }
  }

  return (
    <section aria-labelledby="revisions-title">
      <h2 id="revisions-title">Revisions</h2>
      <div class="table-wrap">
        <table class="grid compact" aria-label="Revisions">
          <thead>
            <tr>
              <th scope="col">Revision</th>
              <th scope="col">Status</th>
              <th scope="col">Saved</th>
              <th scope="col">By</th>
            </tr>
          </thead>
          <tbody>
            {[...revisions].reverse().map((r) => (
              <tr>
                <th scope="row">{r.revision}</th>
                <td>
                  <StatusBadge status={r.status} />
                </td>
                <td>{dateTime(r.createdAt)}</td>
                <td>{r.createdBy}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
      {revisions.length > 1 && (
        <form class="filters" onSubmit={compare} aria-label="Compare revisions">
          <div class="field">
            <label for="cmp-from">From revision</label>
            <select id="cmp-from" value={String(from)} onChange={(e) => setFrom(Number(e.currentTarget.value))}>
              {revisions.map((r) => (
                <option value={String(r.revision)}>{r.revision}</option>
              ))}
            </select>
          </div>
          <div class="field">
            <label for="cmp-to">To revision</label>
            <select id="cmp-to" value={String(to)} onChange={(e) => setTo(Number(e.currentTarget.value))}>
              {revisions.map((r) => (
                <option value={String(r.revision)}>{r.revision}</option>
              ))}
            </select>
          </div>
          <button type="submit" class="btn">
            Compare
          </button>
        </form>
      )}
      <ErrorNote error={error} title="Could not compare" />
      {diff && (
        <div class="table-wrap">
          <table class="grid compact" aria-label={`Differences from revision ${diff.from} to ${diff.to}`}>
            <caption>
              Revision {diff.from} → {diff.to}: {diff.changes.length === 0 ? 'no differences' : `${diff.changes.length} field(s) differ`}
            </caption>
            <thead>
              <tr>
                <th scope="col">Field</th>
                <th scope="col">Change</th>
                <th scope="col">Before</th>
                <th scope="col">After</th>
              </tr>
            </thead>
            <tbody>
              {diff.changes.map((c) => (
                <tr>
                  <th scope="row">
                    <code>{c.path}</code>
                  </th>
                  <td>{c.change}</td>
                  <td class="before">{show(c.before)}</td>
                  <td class="after">{show(c.after)}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
    </section>
  );
}
