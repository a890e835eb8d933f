import { useMemo } from 'preact/hooks';
import { SeriesPlot, type SeriesPoint } from '../charts/series-plot.js';
import type { TimelineMark } from '../charts/timeline.js';
import { useLoad, useSession } from '../context.js';
import { dateTime, duration, num } from '../format.js';
import { sToMs } from '../../../physics/units.js';

/** One stored device event as the history route returns it: its seq, time, type and the event's own fields. */
export interface StoredEvent {
  seq: number;
  ts: string;
  type: string;
  [field: string]: unknown;
}


export interface DeviceEventsAnswer {
  events: StoredEvent[];
  truncated: boolean;
}

interface Calibration {
  latency: { factor: number | null; residualSpread: number | null };
  energy: { factor: number | null; residualSpread: number | null };
  enough: boolean;
  windows: number;
  frames: number;
  drift?: unknown[];
}

interface Prediction {
  inferenceMs: number;
  inferenceMj: number;
  frameLatencyMs: number;
  frameEnergyMj: number;
}

function eventsOf(answer: DeviceEventsAnswer | undefined): StoredEvent[] {
  return answer?.events ?? [];
}

const MARK_KIND: Record<string, TimelineMark['kind']> = {
  'release-applied': 'ok',
  'release-deferred': 'warn',
  'release-refused': 'fail',
  'switch-failed': 'fail',
  'agent-started': 'info',
};

function describe(e: StoredEvent): string {
  switch (e.type) {
    case 'release-applied':
      return `applied release ${String(e.releaseId)}`;
    case 'release-deferred':
      return `deferred release ${String(e.releaseId)}: ${String(e.reason)}`;
    case 'release-refused':
      return `refused release ${String(e.releaseId ?? '')}: ${String(e.reason)}`;
    case 'switch-failed':
      return `switch to ${String(e.toTask)} failed at ${String(e.step)}: ${String(e.error)}${e.restored ? ' (restored)' : ''}`;
    case 'task-switched':
      return `switched ${String(e.fromTask ?? '—')} → ${String(e.toTask)} (${String(e.reason)}), ${num(e.actuationMs as number)} ms actuation`;
    case 'telemetry':
      return `${String(e.task)}: ${String(e.frames)} frames, inference ${num(e.inferenceMsMean as number)} ms, ${num(e.frameEnergyMjMean as number)} mJ/frame`;
    case 'motion':
      return e.moving ? 'started moving' : 'stopped';
    case 'agent-started':
      return `agent ${String(e.agentVersion)} started`;
    default:
      return e.type;
  }
}

/** Events that matter on the timeline: releases applied, deferred or refused, failed switches, agent restarts. */
export function marksOf(answer: DeviceEventsAnswer | undefined): TimelineMark[] {
  return eventsOf(answer)
    .filter((e) => MARK_KIND[e.type])
    .map((e) => ({ atMs: Date.parse(e.ts), label: describe(e), kind: MARK_KIND[e.type]! }));
}

export function DeviceEvents({ answer }: { answer: DeviceEventsAnswer | undefined }) {
  const events = eventsOf(answer).filter((e) => e.type !== 'telemetry');
  if (events.length === 0) return <p class="muted">No events other than telemetry in this window.</p>;
  return (
    <section aria-labelledby="events-title">
      <h2 id="events-title">Events in this window</h2>
      {answer?.truncated && <p class="note note-warn">Only the first {answer.events.length} events of this window are shown: zoom in to see the rest.</p>}
      <div class="table-wrap scroll-y">
        <table class="grid compact" aria-label="Device events">
          <thead>
            <tr>
              <th scope="col">#</th>
              <th scope="col">When (device clock)</th>
              <th scope="col">Event</th>
              <th scope="col">Detail</th>
            </tr>
          </thead>
          <tbody>
            {[...events].reverse().map((e) => (
              <tr>
                <td>{e.seq}</td>
                <td class="nowrap">{dateTime(e.ts)}</td>
                <td>
                  <code>{e.type}</code>
                </td>
                <td>{describe(e)}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </section>
  );
}

/** Measured inference latency and frame energy from telemetry, against the release's prediction and the calibration. */
export function DeviceMeasurements({ deviceId, answer, fromMs, toMs }: { deviceId: string; answer: DeviceEventsAnswer | undefined; fromMs: number; toMs: number }) {
  const { api } = useSession();
  const telemetry = useMemo(() => eventsOf(answer).filter((e) => e.type === 'telemetry'), [answer]);
  const releaseIds = [...new Set(telemetry.map((e) => String(e.releaseId)))].sort();
  const predictions = useLoad(async () => {
    const out: Record<string, Record<string, Prediction>> = {};
    await Promise.all(
      releaseIds.map(async (id) => {
        const signed = await api.get<{ release: { tasks: Record<string, { predicted: Prediction }> } }>(`/releases/${encodeURIComponent(id)}`);
        out[id] = Object.fromEntries(Object.entries(signed.release.tasks).map(([t, x]) => [t, x.predicted]));
      }),
    );
    return out;
  }, [releaseIds.join(',')]);
  const calibration = useLoad(() => api.get<Calibration | null>(`/calibration/devices/${encodeURIComponent(deviceId)}`).catch(() => null), [deviceId, telemetry.length]);

  const cal = calibration.data;
  const latency: SeriesPoint[] = [];
  const energy: SeriesPoint[] = [];
  for (const e of telemetry) {
    const p = predictions.data?.[String(e.releaseId)]?.[String(e.task)];
    const atMs = Date.parse(e.ts);
    latency.push({
      atMs,
      measured: e.inferenceMsMean as number,
      predicted: p?.inferenceMs ?? null,
      calibrated: p && cal?.latency.factor ? p.inferenceMs * cal.latency.factor : null,
    });
    energy.push({
      atMs,
      measured: e.inferenceMjMean as number,
      predicted: p?.inferenceMj ?? null,
      calibrated: p && cal?.energy.factor ? p.inferenceMj * cal.energy.factor : null,
    });
  }

  return (
    <section aria-labelledby="measured-title">
      <h2 id="measured-title">Measured against predicted</h2>
      <p class="muted">
        {cal && cal.windows > 0
          ? `Calibration of this robot over ${cal.windows} telemetry windows (${cal.frames} frames): measured inference time is ${num(cal.latency.factor)} × the prediction (spread ${num(cal.latency.residualSpread === null ? null : cal.latency.residualSpread * 100)} %), energy ${num(cal.energy.factor)} ×${cal.enough ? '' : '. Too few samples to rely on yet'}.`
          : 'No calibration for this robot yet: it has reported no telemetry.'}
        {cal?.drift && cal.drift.length > 0 && ` ${cal.drift.length} drift episode(s) recorded.`}
      </p>
      <div class="charts">
        <SeriesPlot title="Inference time per frame" unit="ms" points={latency} fromMs={fromMs} toMs={toMs} />
        <SeriesPlot title="Inference energy per frame" unit="mJ" points={energy} fromMs={fromMs} toMs={toMs} />
      </div>
    </section>
  );
}

interface UsageRow {
  day: string;
  task: string;
  seconds: number;
  frames: number;
  energyJ: number;
  inferenceEnergyJ: number;
}

/** Time, frames and energy per UTC day and task in the window, summed from telemetry by the usage route. */
export function DeviceUsage({ deviceId, fromMs, toMs, reloadKey }: { deviceId: string; fromMs: number; toMs: number; reloadKey: unknown }) {
  const { api } = useSession();
  const usage = useLoad(
    () => api.get<{ days: UsageRow[] }>(`/devices/${encodeURIComponent(deviceId)}/usage`, { from: new Date(fromMs).toISOString(), to: new Date(toMs).toISOString() }),
    [deviceId, fromMs, toMs, reloadKey],
  );
  const rows = usage.data?.days ?? [];
  if (rows.length === 0) return null;
  return (
    <section aria-labelledby="usage-title">
      <h2 id="usage-title">Time and energy by task</h2>
      <div class="table-wrap">
        <table class="grid compact" aria-label="Usage per day and task">
          <thead>
            <tr>
              <th scope="col">Day (UTC)</th>
              <th scope="col">Task</th>
              <th scope="col" class="numeric">Time</th>
              <th scope="col" class="numeric">Frames</th>
              <th scope="col" class="numeric">Energy (J)</th>
              <th scope="col" class="numeric">of it inference (J)</th>
            </tr>
          </thead>
          <tbody>
            {rows.map((r) => (
              <tr>
                <td>{r.day}</td>
                <td>{r.task}</td>
                <td class="numeric">{duration(sToMs(r.seconds))}</td>
                <td class="numeric">{num(r.frames)}</td>
                <td class="numeric">{num(r.energyJ)}</td>
                <td class="numeric">{num(r.inferenceEnergyJ)}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </section>
  );
}
