import { describe, expect, it } from 'vitest';
import { createMetricsRegistry } from '../../src/metrics/registry.js';

describe('metrics registry (Prometheus text exposition format 0.0.4)', () => {
  it('renders counters, gauges and cumulative histogram buckets with escaped label values', () => {
    const r = createMetricsRegistry();
    const c = r.counter('demo_requests_total', 'Requests (demo data)');
    c.inc({ route: '/a"b\\c\nd' });
    c.inc({ route: '/a"b\\c\nd' }, 2);
    r.gauge('demo_online', 'Online (demo data)', () => [{ value: 4 }]);
    const h = r.histogram('demo_seconds', 'Latency (demo data)', [0.1, 1]);
    h.observe(0.05);
    h.observe(0.5);
    h.observe(5);
    expect(r.render()).toBe(
      [
        '# HELP demo_requests_total Requests (demo data)',
        '# TYPE demo_requests_total counter',
        'demo_requests_total{route="/a\\"b\\\\c\\nd"} 3',
        '# HELP demo_online Online (demo data)',
        '# TYPE demo_online gauge',
        'demo_online 4',
        '# HELP demo_seconds Latency (demo data)',
        '# TYPE demo_seconds histogram',
        'demo_seconds_bucket{le="0.1"} 1',
        'demo_seconds_bucket{le="1"} 2',
        'demo_seconds_bucket{le="+Inf"} 3',
        'demo_seconds_sum 5.55',
        'demo_seconds_count 3',
        '',
      ].join('\n'),
    );
  });

  it('returns the same metric for the same name and refuses a clash of types or a bad name', () => {
    const r = createMetricsRegistry();
    expect(r.counter('x_total', 'x')).toBe(r.counter('x_total', 'x'));
    expect(() => r.gauge('x_total', 'x')).toThrow(/already a counter/);
    expect(() => r.counter('bad name', 'x')).toThrow(/invalid metric name/);
    expect(() => r.counter('y_total', 'y').inc({}, -1)).toThrow(/only go up/);
  });
});
