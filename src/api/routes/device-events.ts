import { resolveWindow } from '../../fleet/queries.js';
import { readQuery } from '../body.js';
import type { ResolvedDeps } from '../context.js';
import { deviceEventsQuerySchema } from './device-events-query.js';
import { badRequest, notFound } from '../errors.js';
import type { Router } from '../routing.js';

const DEFAULT_LIMIT = 2000;

/**
 * A device's stored events in a window, oldest first (the console's event list, and the telemetry it
 * plots against the release's prediction). `truncated` says the window held more than `limit`.
 */
export function registerDeviceEventsRoute(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;

  route('devices.events', (c) => {
    const id = c.req.param('id') ?? '';
    const q = readQuery(c, deviceEventsQuerySchema);
    if (!store.devices.get(id)) throw notFound(`device '${id}'`);
    const w = resolveWindow(q, deps.clock.now().getTime());
    if (!w.ok) throw badRequest('invalid event window', [{ path: w.path, message: w.message }]);
    const window = { from: new Date(w.fromMs).toISOString(), to: new Date(w.toMs).toISOString() };
    const repos = { events: store.deviceEvents, range: store.eventRanges };
    const limit = q.limit ?? DEFAULT_LIMIT;
    const { loSeq, hiSeq } = repos.range.seqRange(id, w.fromMs, w.toMs);
    const rows = repos.events
      .list(id, { afterSeq: loSeq - 1, limit: limit + 1, ...(q.type !== undefined ? { type: q.type } : {}) })
      .filter((e) => e.seq < hiSeq);
    const events = rows.slice(0, limit).map((e) => ({ ...(e.event as Record<string, unknown>), seq: e.seq, ts: e.ts, type: e.type, receivedAt: e.receivedAt }));
    return c.json({ deviceId: id, ...window, events, truncated: rows.length > limit });
  });
}
