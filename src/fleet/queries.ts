import { z } from 'zod';
import { ROLLOUT_STATUSES } from '../store/rollouts.js';

const isoTime = z.iso.datetime({ offset: true });

/** A history or usage window: ISO times; `to` defaults to now and `from` to one day before `to`. */
export const historyQuerySchema = z.strictObject({
  from: isoTime.optional(),
  to: isoTime.optional(),
  format: z.enum(['json', 'csv']).optional(),
});
export type HistoryQuery = z.infer<typeof historyQuerySchema>;

/** A device's history window; format=mcap also gives it as an MCAP recording. */
export const deviceHistoryQuerySchema = historyQuerySchema.extend({ format: z.enum(['json', 'csv', 'mcap']).optional() });
export type DeviceHistoryQuery = z.infer<typeof deviceHistoryQuerySchema>;

export const rolloutQuerySchema = z.strictObject({
  status: z.enum(ROLLOUT_STATUSES).optional(),
  limit: z.coerce.number().int().min(1).max(1000).optional(),
});

export const driftQuerySchema = z.strictObject({
  device: z.string().max(64).optional(),
  open: z.enum(['true', 'false']).optional(),
  limit: z.coerce.number().int().min(1).max(1000).optional(),
});

/** The longest window one history or usage request may span. */
export const MAX_WINDOW_MS = 366 * 86_400_000;
export const DEFAULT_WINDOW_MS = 86_400_000;

export type Window = { ok: true; fromMs: number; toMs: number } | { ok: false; path: string; message: string };

/** Resolves a window against the present; refuses one that ends before it starts or spans more than MAX_WINDOW_MS. */
export function resolveWindow(q: { from?: string | undefined; to?: string | undefined }, nowMs: number): Window {
  const toMs = q.to !== undefined ? Date.parse(q.to) : nowMs;
  const fromMs = q.from !== undefined ? Date.parse(q.from) : toMs - DEFAULT_WINDOW_MS;
  if (!(fromMs < toMs)) return { ok: false, path: 'from', message: `must be before 'to' (${new Date(toMs).toISOString()})` };
  if (toMs - fromMs > MAX_WINDOW_MS) return { ok: false, path: 'to', message: `the window may span at most ${MAX_WINDOW_MS / 86_400_000} days` };
  return { ok: true, fromMs, toMs };
}

export const reportQuerySchema = z.strictObject({
  revision: z.coerce.number().int().positive().optional(),
});
