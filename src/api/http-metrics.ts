import type { MiddlewareHandler } from 'hono';
import { METRIC_NAMES, type MetricsRegistry } from '../metrics/registry.js';
import type { Store } from '../store/store.js';
import type { AppEnv } from './context.js';

/** Latency buckets in seconds, from 5 ms to 10 s (the usual spread for an API; common practice). */
const BUCKETS_S = [0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10];

/** Counts requests and their latency by route pattern, method and status; registers the fleet gauges. */
export function createHttpMetrics(registry: MetricsRegistry, store: Store): MiddlewareHandler<AppEnv> {
  const requests = registry.counter(METRIC_NAMES.httpRequests, 'HTTP requests by route, method and status');
  const duration = registry.histogram(METRIC_NAMES.httpDuration, 'HTTP request latency by route, method and status (seconds)', BUCKETS_S);
  registry.counter(METRIC_NAMES.validationFailures, 'Profile validations whose report failed');
  registry.counter(METRIC_NAMES.mqttRejects, 'MQTT connections and messages the broker or bridge refused');
  registry.gauge(METRIC_NAMES.devicesOnline, 'Devices whose last state says online', function devicesOnline() {
    if (!store.isOpen()) return [];
    return [{ value: store.deviceStates.countOnline() }];
  });

  return async function recordHttpMetrics(c, next) {
    const started = performance.now();
    try {
      await next();
    } finally {
      const labels = { route: c.get('route') ?? 'unmatched', method: c.req.method, status: String(c.res.status) };
      requests.inc(labels);
      duration.observe((performance.now() - started) / 1000, labels);
    }
  };
}
