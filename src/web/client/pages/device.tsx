import { useEffect, useState } from 'preact/hooks';
import { Timeline } from '../charts/timeline.js';
import { fittedWindow, zoomWindow } from '../charts/time-axis.js';
import { useLiveChanges, useLoad, useSession } from '../context.js';
import { ago, dateTime } from '../format.js';
import { href } from '../router.js';
import type { DeviceDetail } from '../../../api-client/response-types.js';
import { ErrorNote, Loading, OnlineBadge, SafetyCaution } from '../ui/status.js';
import { DeviceAssign } from './device-assign.js';
import { DeviceDrift } from './device-drift.js';
import { DeviceEvents, DeviceMeasurements, DeviceUsage, marksOf, type DeviceEventsAnswer } from './device-history.js';
import type { DeviceHistoryAnswer } from '../../../api-client/response-types.js';

const PRESETS: Array<{ label: string; spanMs: number }> = [
  { label: 'Last day', spanMs: 86_400_000 },
  { label: '6 h', spanMs: 6 * 3_600_000 },
  { label: '1 h', spanMs: 3_600_000 },
  { label: '15 min', spanMs: 15 * 60_000 },
];

/** One robot: what it reports, the profiles it ran over a chosen window, its events, measured against predicted. */
type Freshness = NonNullable<NonNullable<DeviceDetail['reportedState']>['freshness']>;

/** What the robot read from the server's latest freshness statement, in a few words. */
function freshnessText(f: Freshness | null | undefined): string {
  if (!f) return 'no statement received';
  if (f.expired) return `no fresh word since ${dateTime(f.expiresAt)}`;
  if (f.stale) return `behind: ${f.latestReleaseId ?? 'a release'} (sequence ${f.latestVersion ?? '?'}) exists`;
  return `up to date as of ${dateTime(f.issuedAt)}`;
}

export function DevicePage({ deviceId }: { deviceId: string }) {
  const { api, can } = useSession();
  const [win, setWinState] = useState<{ fromMs: number; toMs: number }>(() => {
    const now = Date.now();
    return { fromMs: now - 86_400_000, toMs: now };
  });
  // Until the person picks a window, it is fitted to the device's life so far (from its enrolment to now).
  const [fitted, setFitted] = useState(true);
  const setWin: typeof setWinState = (next) => {
    setFitted(false);
    setWinState(next);
  };
  const device = useLoad(() => api.get<DeviceDetail>(`/devices/${encodeURIComponent(deviceId)}`), [deviceId]);
  const history = useLoad(
    // A window that ends at the present asks without 'to': the server's now, so what still runs (or is still offline) has no end.
    () => api.get<DeviceHistoryAnswer>(`/devices/${encodeURIComponent(deviceId)}/history`, { from: new Date(win.fromMs).toISOString(), to: win.toMs >= Date.now() - 5_000 ? undefined : new Date(win.toMs).toISOString() }),
    [deviceId, win.fromMs, win.toMs],
  );
  const events = useLoad(
    () => api.get<DeviceEventsAnswer>(`/devices/${encodeURIComponent(deviceId)}/events`, { from: new Date(win.fromMs).toISOString(), to: new Date(win.toMs).toISOString() }),
    [deviceId, win.fromMs, win.toMs],
  );
  const mine = (c: { kind: string; deviceIds?: string[]; path?: string }) =>
    c.kind === 'devices' ? (c.deviceIds ?? []).includes(deviceId) : (c.path ?? '').includes(deviceId) || (c.path ?? '').includes('/rollouts');
  const enrolledAt = device.data?.createdAt;
  useEffect(() => {
    if (fitted && enrolledAt) setWinState(fittedWindow(Date.parse(enrolledAt), Date.now()));
  }, [enrolledAt]);
  useLiveChanges(() => {
    device.reload();
    // Follow the present when the window ends at it, so a live robot's newest stretch shows.
    if (fitted && enrolledAt) setWinState(fittedWindow(Date.parse(enrolledAt), Date.now()));
    else if (win.toMs >= Date.now() - 60_000) setWinState((w) => ({ fromMs: w.fromMs + (Date.now() - w.toMs), toMs: Date.now() }));
    else {
      history.reload();
      events.reload();
    }
  }, mine);

  if (device.error) return <ErrorNote error={device.error} title={`Could not load device ${deviceId}`} />;
  if (!device.data) return <Loading what={`device ${deviceId}`} />;
  const d = device.data;
  const s = d.reported?.state ?? d.reportedState;
  // A window that ends at the present keeps ending there when zoomed, so the newest stretch stays in view.
  const zoom = (factor: number) => setWin((w) => {
    const [fromMs, toMs] = zoomWindow(w.fromMs, w.toMs, factor, w.toMs >= Date.now() - 5_000 ? w.toMs : undefined);
    return { fromMs, toMs };
  });
  const pan = (fraction: number) => setWin((w) => {
    const shift = (w.toMs - w.fromMs) * fraction;
    return { fromMs: Math.round(w.fromMs + shift), toMs: Math.round(w.toMs + shift) };
  });
  const intervals = history.data?.intervals ?? [];

  return (
    <section aria-labelledby="device-title">
      <div class="page-head">
        <p class="crumbs">
          <a href={href({ page: 'fleet' })}>Fleet</a> /
        </p>
        <h1 id="device-title">
          {d.id} <OnlineBadge online={d.online} />
        </h1>
        <dl class="facts">
          <div>
            <dt>Class</dt>
            <dd>{d.deviceClassId}</dd>
          </div>
          <div>
            <dt>Tags</dt>
            <dd>{d.tags.length ? d.tags.map((t) => <span class="tag">{t}</span>) : '—'}</dd>
          </div>
          <div>
            <dt>{d.online ? 'Active task' : 'Last known task'}</dt>
            <dd>
              {s?.activeTask ?? '—'}
              {s?.profileId ? <span class="muted small"> {s.profileId} r{s.profileRevision}</span> : null}
            </dd>
          </div>
          <div>
            <dt>Applied release</dt>
            <dd>{s?.releaseId ? <code>{s.releaseId}</code> : '—'}</dd>
          </div>
          <div>
            <dt>Assigned release</dt>
            <dd>{d.assignedReleaseId ? <code>{d.assignedReleaseId}</code> : '—'}</dd>
          </div>
          <div>
            <dt>Waiting to apply</dt>
            <dd>{s?.pending ? `${s.pending.releaseId}: ${s.pending.reason}` : '—'}</dd>
          </div>
          <div>
            <dt>Freshness</dt>
            <dd title={s?.freshness ? `statement issued ${dateTime(s.freshness.issuedAt)}, holds until ${dateTime(s.freshness.expiresAt)}` : undefined}>{freshnessText(s?.freshness)}</dd>
          </div>
          <div>
            <dt>Moving</dt>
            <dd>{s ? (s.moving ? 'yes' : 'no') : '—'}</dd>
          </div>
          <div>
            <dt>Last heard</dt>
            <dd title={dateTime(d.lastSeenAt)}>{ago(d.lastSeenAt)}</dd>
          </div>
        </dl>
        {s?.freshness?.stale && (
          <p class="note note-warn">
            A newer release of this class, {s.freshness.latestReleaseId ?? 'unnamed'} (sequence {s.freshness.latestVersion ?? '?'}), exists than the robot runs or holds: it
            was not sent to it. A staged rollout holds robots back on purpose; otherwise assign it or look for what withholds it. The robot applies nothing until the
            release itself arrives.
          </p>
        )}
        {s?.freshness?.expired && (
          <p class="note note-warn">
            The robot has heard no fresh word from the server since {dateTime(s.freshness.expiresAt)}: it cannot tell whether newer releases exist.
          </p>
        )}
        {s?.refused && (
          <p class="note note-fail">
            <span aria-hidden="true">✕ </span>The robot refused {s.refused.releaseId ?? 'a release'}: {s.refused.reason}
          </p>
        )}
      </div>
      <DeviceDrift episodes={d.drift ?? []} />
      {can('devices.assign') && (
        <>
          <SafetyCaution />
          <DeviceAssign deviceId={d.id} deviceClassId={d.deviceClassId} onAssigned={device.reload} />
        </>
      )}
      <h2>Profiles over time</h2>
      <div class="toolbar" role="toolbar" aria-label="Timeline window">
        <button type="button" class="btn btn-small" aria-pressed={fitted} onClick={() => (setFitted(true), setWinState(fittedWindow(Date.parse(d.createdAt), Date.now())))}>
          Since enrolment
        </button>
        {PRESETS.map((p) => (
          <button type="button" class="btn btn-small" onClick={() => setWin({ fromMs: Date.now() - p.spanMs, toMs: Date.now() })}>
            {p.label}
          </button>
        ))}
        <span class="sep" aria-hidden="true" />
        <button type="button" class="btn btn-small" onClick={() => pan(-0.5)} aria-label="Earlier">
          ← earlier
        </button>
        <button type="button" class="btn btn-small" onClick={() => zoom(0.5)}>
          zoom in
        </button>
        <button type="button" class="btn btn-small" onClick={() => zoom(2)}>
          zoom out
        </button>
        <button type="button" class="btn btn-small" onClick={() => pan(0.5)} aria-label="Later">
          later →
        </button>
        <span class="muted small">
          {dateTime(new Date(win.fromMs).toISOString())} – {dateTime(new Date(win.toMs).toISOString())} · drag across the chart to zoom to a stretch
        </span>
      </div>
      <ErrorNote error={history.error} title="Could not load the history" />
      {!history.data && !history.error ? (
        <Loading what="history" />
      ) : (
        <Timeline intervals={intervals} marks={marksOf(events.data)} fromMs={win.fromMs} toMs={win.toMs} nowMs={Date.now()} onSelect={(fromMs, toMs) => setWin({ fromMs, toMs })} />
      )}
      <DeviceMeasurements deviceId={d.id} answer={events.data} fromMs={win.fromMs} toMs={win.toMs} />
      <DeviceUsage deviceId={d.id} fromMs={win.fromMs} toMs={win.toMs} reloadKey={events.data} />
      <ErrorNote error={events.error} title="Could not load the events" />
      <DeviceEvents answer={events.data} />
    </section>
  );
}
