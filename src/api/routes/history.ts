import type { Context } from 'hono';
import { INTERVAL_COLUMNS, USAGE_COLUMNS, toCsv } from '../../fleet/history/csv.js';
import { createHistoryReader, type HistoryInterval, type HistoryWindow } from '../../fleet/history/intervals.js';
import { deviceHistoryQuerySchema, historyQuerySchema, resolveWindow, type HistoryQuery } from '../../fleet/queries.js';
import { createRecordingReader } from '../../fleet/history/recording.js';
import { createUsageReader } from '../../fleet/history/usage.js';
import { readQuery } from '../body.js';
import type { AppEnv, ResolvedDeps } from '../context.js';
import { badRequest, notFound } from '../errors.js';
import type { Router } from '../routing.js';

function wantsCsv(c: Context<AppEnv>, q: HistoryQuery): boolean {
  if (q.format !== undefined) return q.format === 'csv';
  return (c.req.header('accept') ?? '').toLowerCase().includes('text/csv');
}

/** Which profile ran when (from task-switched events, with the change that caused it) and energy and time per day and task. */
export function registerHistoryRoutes(route: Router, deps: ResolvedDeps): void {
  const history = createHistoryReader(deps.store);
  const usage = createUsageReader(deps.store);
  const recording = createRecordingReader(deps.store, 'ocellus');

  function windowOf(q: Pick<HistoryQuery, 'from' | 'to'>): HistoryWindow {
    const nowMs = deps.clock.now().getTime();
    const w = resolveWindow(q, nowMs);
    if (!w.ok) throw badRequest('invalid history window', [{ path: w.path, message: w.message }]);
    return { fromMs: w.fromMs, toMs: w.toMs, nowMs };
  }

  function answer(c: Context<AppEnv>, q: HistoryQuery, w: HistoryWindow, intervals: HistoryInterval[], name: string) {
    if (wantsCsv(c, q)) {
      return c.body(toCsv(INTERVAL_COLUMNS, intervals), 200, {
        'Content-Type': 'text/csv; charset=utf-8',
        'Content-Disposition': `attachment; filename="${name}-history.csv"`,
      });
    }
    return c.json({ from: new Date(w.fromMs).toISOString(), to: new Date(w.toMs).toISOString(), intervals });
  }

  route('devices.history', async (c) => {
    const id = c.req.param('id') ?? '';
    const q = readQuery(c, deviceHistoryQuerySchema);
    if (!deps.store.devices.get(id)) throw notFound(`device '${id}'`);
    const w = windowOf(q);
    if (q.format === 'mcap') {
      const bytes = await recording(id, w);
      return c.body(bytes as Uint8Array<ArrayBuffer>, 200, {
        'Content-Type': 'application/octet-stream',
        'Content-Disposition': `attachment; filename="${id}-history.mcap"`,
      });
    }
    return answer(c, { ...q, format: q.format }, w, history.device(id, w), id);
  });

  route('history.task', (c) => {
    const id = c.req.param('id') ?? '';
    const q = readQuery(c, historyQuerySchema);
    const w = windowOf(q);
    return answer(c, q, w, history.task(id, w), id);
  });

  route('history.release', (c) => {
    const id = c.req.param('id') ?? '';
    const q = readQuery(c, historyQuerySchema);
    if (!deps.store.releases.get(id)) throw notFound(`release '${id}'`);
    const w = windowOf(q);
    return answer(c, q, w, history.release(id, w), id);
  });

  route('devices.usage', (c) => {
    const id = c.req.param('id') ?? '';
    const q = readQuery(c, historyQuerySchema);
    if (!deps.store.devices.get(id)) throw notFound(`device '${id}'`);
    const w = windowOf(q);
    const rows = usage.device(id, w.fromMs, w.toMs);
    if (wantsCsv(c, q)) return c.body(toCsv(USAGE_COLUMNS, rows), 200, { 'Content-Type': 'text/csv; charset=utf-8' });
    return c.json({ deviceId: id, from: new Date(w.fromMs).toISOString(), to: new Date(w.toMs).toISOString(), days: rows });
  });
}
