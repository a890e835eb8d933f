import { useMemo, useState } from 'preact/hooks';
import { useLiveChanges, useLoad, useSession } from '../context.js';
import { ago, dateTime } from '../format.js';
import { href } from '../router.js';
import type { DeviceListItem } from '../../../api-client/response-types.js';
import { ErrorNote, Loading, OnlineBadge } from '../ui/status.js';

type OnlineFilter = 'all' | 'online' | 'offline';

function matches(d: DeviceListItem, text: string): boolean {
  if (!text) return true;
  const hay = [d.id, d.deviceClassId, ...d.tags, d.reportedState?.activeTask ?? '', d.reportedState?.releaseId ?? '', d.assignedReleaseId ?? ''];
  return hay.some((h) => h.toLowerCase().includes(text));
}

function ReleaseCell({ d }: { d: DeviceListItem }) {
  const s = d.reportedState;
  if (!s?.releaseId) return <span class="muted">none</span>;
  return (
    <span>
      <code>{s.releaseId}</code>
    </span>
  );
}

function PendingCell({ d }: { d: DeviceListItem }) {
  const s = d.reportedState;
  if (s?.pending) {
    return (
      <span class="pending" title={s.pending.reason}>
        <span aria-hidden="true">⏸ </span>
        <code>{s.pending.releaseId}</code> deferred: {s.pending.reason}
      </span>
    );
  }
  if (s?.refused) {
    return (
      <span class="refused" title={s.refused.reason}>
        <span aria-hidden="true">✕ </span>refused {s.refused.releaseId ? <code>{s.refused.releaseId}</code> : null}: {s.refused.reason}
      </span>
    );
  }
  if (d.assignedReleaseId && d.assignedReleaseId !== s?.releaseId) {
    return (
      <span class="pending">
        <span aria-hidden="true">⇢ </span>
        <code>{d.assignedReleaseId}</code> sent, not yet reported
      </span>
    );
  }
  return <span class="muted">—</span>;
}

/** Every device with what it runs and what is on its way to it; refreshed live as devices report. */
/** Online: the task it runs and the profile revision; offline: the task it last reported, said as such. */
function TaskCell({ d }: { d: DeviceListItem }) {
  const r = d.reportedState;
  if (!r?.activeTask) return <span class="muted">—</span>;
  const profile = r.profileId ? (
    <span class="muted small nowrap">
      {' '}
      {r.profileId} r{r.profileRevision}
    </span>
  ) : null;
  if (d.online) return <span data-task="active">{r.activeTask}{profile}</span>;
  return (
    <span data-task="last-known" class="muted">
      last known task: {r.activeTask}
      {profile}
    </span>
  );
}

export function FleetPage() {
  const { api } = useSession();
  const [deviceClass, setDeviceClass] = useState('');
  const [tag, setTag] = useState('');
  const [online, setOnline] = useState<OnlineFilter>('all');
  const [text, setText] = useState('');
  const devices = useLoad(() => api.get<DeviceListItem[]>('/devices'), []);
  useLiveChanges(devices.reload);

  const all = devices.data ?? [];
  const classes = useMemo(() => [...new Set(all.map((d) => d.deviceClassId))].sort(), [all]);
  const tags = useMemo(() => [...new Set(all.flatMap((d) => d.tags))].sort(), [all]);
  const needle = text.trim().toLowerCase();
  const shown = all.filter(
    (d) =>
      (!deviceClass || d.deviceClassId === deviceClass) &&
      (!tag || d.tags.includes(tag)) &&
      (online === 'all' || (online === 'online') === (d.online === true)) &&
      matches(d, needle),
  );
  const onlineCount = all.filter((d) => d.online).length;

  return (
    <section aria-labelledby="fleet-title">
      <div class="page-head">
        <h1 id="fleet-title">Fleet</h1>
        <p class="muted">
          {all.length} device{all.length === 1 ? "" : "s"}, {onlineCount} online. Rows update as robots report.
        </p>
      </div>
      <form class="filters" onSubmit={(e) => e.preventDefault()} aria-label="Filter devices">
        <div class="field">
          <label for="f-class">Device class</label>
          <select id="f-class" value={deviceClass} onChange={(e) => setDeviceClass(e.currentTarget.value)}>
            <option value="">any</option>
            {classes.map((c) => (
              <option value={c}>{c}</option>
            ))}
          </select>
        </div>
        <div class="field">
          <label for="f-tag">Tag</label>
          <select id="f-tag" value={tag} onChange={(e) => setTag(e.currentTarget.value)}>
            <option value="">any</option>
            {tags.map((t) => (
              <option value={t}>{t}</option>
            ))}
          </select>
        </div>
        <div class="field">
          <label for="f-online">Connection</label>
          <select id="f-online" value={online} onChange={(e) => setOnline(e.currentTarget.value as OnlineFilter)}>
            <option value="all">any</option>
            <option value="online">online</option>
            <option value="offline">offline</option>
          </select>
        </div>
        <div class="field grow">
          <label for="f-text">Search</label>
          <input id="f-text" type="search" placeholder="id, task, release…" value={text} onInput={(e) => setText(e.currentTarget.value)} />
        </div>
      </form>
      <ErrorNote error={devices.error} title="Could not load the fleet" />
      {devices.loading && !devices.data ? (
        <Loading what="devices" />
      ) : (
        <div class="table-wrap">
          <table class="grid" aria-label="Devices">
            <thead>
              <tr>
                <th scope="col">Device</th>
                <th scope="col">Class</th>
                <th scope="col">Tags</th>
                <th scope="col">Connection</th>
                <th scope="col">Task (profile revision)</th>
                <th scope="col">Applied release</th>
                <th scope="col">On its way</th>
                <th scope="col">Last heard</th>
              </tr>
            </thead>
            <tbody>
              {shown.map((d) => (
                <tr data-device={d.id}>
                  <th scope="row">
                    <a href={href({ page: 'device', deviceId: d.id })}>{d.id}</a>
                  </th>
                  <td class="nowrap">{d.deviceClassId}</td>
                  <td>
                    {d.tags.map((t) => (
                      <span class="tag">{t}</span>
                    ))}
                  </td>
                  <td>
                    <OnlineBadge online={d.online} />
                  </td>
                  <td>
                    <TaskCell d={d} />
                  </td>
                  <td>
                    <ReleaseCell d={d} />
                  </td>
                  <td>
                    <PendingCell d={d} />
                  </td>
                  <td title={dateTime(d.lastSeenAt)}>{ago(d.lastSeenAt)}</td>
                </tr>
              ))}
              {shown.length === 0 && (
                <tr>
                  <td colSpan={8} class="muted">
                    {all.length === 0 ? 'No devices are enrolled yet.' : 'No device matches these filters.'}
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
