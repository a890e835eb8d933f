/**
 * A small in-process metrics registry rendered in the Prometheus text exposition format (version 0.0.4).
 * No imports: the HTTP API, the bus bridge and the broker all record into the same registry object.
 */

export type Labels = Record<string, string>;

interface Metric {
  readonly name: string;
  readonly help: string;
  readonly type: 'counter' | 'gauge' | 'histogram';
  samples(): string[];
}

/** Label values are escaped as the exposition format requires: backslash, double quote and newline. */
function labelText(labels: Labels, extra?: Labels): string {
  const all = { ...labels, ...extra };
  const keys = Object.keys(all).sort();
  if (keys.length === 0) return '';
  const escape = (v: string) => v.replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/\n/g, '\\n');
  return `{${keys.map((k) => `${k}="${escape(all[k]!)}"`).join(',')}}`;
}

function keyOf(labels: Labels): string {
  return JSON.stringify(Object.keys(labels).sort().map((k) => [k, labels[k]]));
}

function numberText(v: number): string {
  if (v === Infinity) return '+Inf';
  if (v === -Infinity) return '-Inf';
  return Number.isNaN(v) ? 'NaN' : String(v);
}

export class Counter implements Metric {
  readonly type = 'counter' as const;
  private readonly values = new Map<string, { labels: Labels; value: number }>();
  constructor(readonly name: string, readonly help: string) {}

  inc(labels: Labels = {}, by = 1): void {
    if (!(by >= 0)) throw new RangeError(`counter ${this.name} can only go up`);
    const key = keyOf(labels);
    const entry = this.values.get(key) ?? { labels: { ...labels }, value: 0 };
    entry.value += by;
    this.values.set(key, entry);
  }

  get(labels: Labels = {}): number {
    return this.values.get(keyOf(labels))?.value ?? 0;
  }

  samples(): string[] {
    return [...this.values.values()].map((e) => `${this.name}${labelText(e.labels)} ${numberText(e.value)}`);
  }
}

/** A gauge either set directly or read at scrape time from a callback (e.g. devices online from the database). */
export class Gauge implements Metric {
  readonly type = 'gauge' as const;
  private readonly values = new Map<string, { labels: Labels; value: number }>();
  constructor(
    readonly name: string,
    readonly help: string,
    private readonly collect?: () => Array<{ labels?: Labels; value: number }>,
  ) {}

  set(value: number, labels: Labels = {}): void {
    this.values.set(keyOf(labels), { labels: { ...labels }, value });
  }

  samples(): string[] {
    const entries = this.collect
      ? this.collect().map((s) => ({ labels: s.labels ?? {}, value: s.value }))
      : [...this.values.values()];
    return entries.map((e) => `${this.name}${labelText(e.labels)} ${numberText(e.value)}`);
  }
}

export class Histogram implements Metric {
  readonly type = 'histogram' as const;
  private readonly series = new Map<string, { labels: Labels; counts: number[]; sum: number; count: number }>();
  readonly buckets: readonly number[];
  constructor(readonly name: string, readonly help: string, buckets: readonly number[]) {
    this.buckets = [...buckets].sort((a, b) => a - b);
  }

  observe(value: number, labels: Labels = {}): void {
    const key = keyOf(labels);
    const s = this.series.get(key) ?? { labels: { ...labels }, counts: this.buckets.map(() => 0), sum: 0, count: 0 };
    this.buckets.forEach((upper, i) => {
      if (value <= upper) s.counts[i]! += 1;
    });
    s.sum += value;
    s.count += 1;
    this.series.set(key, s);
  }

  count(labels: Labels = {}): number {
    return this.series.get(keyOf(labels))?.count ?? 0;
  }

  samples(): string[] {
    const lines: string[] = [];
    for (const s of this.series.values()) {
      this.buckets.forEach((upper, i) => {
        lines.push(`${this.name}_bucket${labelText(s.labels, { le: numberText(upper) })} ${s.counts[i]}`);
      });
      lines.push(`${this.name}_bucket${labelText(s.labels, { le: '+Inf' })} ${s.count}`);
      lines.push(`${this.name}_sum${labelText(s.labels)} ${numberText(s.sum)}`);
      lines.push(`${this.name}_count${labelText(s.labels)} ${s.count}`);
    }
    return lines;
  }
}

const METRIC_NAME = /^[a-zA-Z_:][a-zA-Z0-9_:]*$/;

export interface MetricsRegistry {
  /** Returns the counter of that name, creating it on first use (so two modules can share one). */
  counter(name: string, help: string): Counter;
  gauge(name: string, help: string, collect?: () => Array<{ labels?: Labels; value: number }>): Gauge;
  histogram(name: string, help: string, buckets: readonly number[]): Histogram;
  /** The Prometheus text exposition of every metric. */
  render(): string;
}

export const PROMETHEUS_CONTENT_TYPE = 'text/plain; version=0.0.4; charset=utf-8';

export function createMetricsRegistry(): MetricsRegistry {
  const metrics = new Map<string, Metric>();

  function register<M extends Metric>(name: string, make: () => M, type: Metric['type']): M {
    if (!METRIC_NAME.test(name)) throw new RangeError(`invalid metric name ${JSON.stringify(name)}`);
    const existing = metrics.get(name);
    if (existing) {
      if (existing.type !== type) throw new TypeError(`metric ${name} is already a ${existing.type}`);
      return existing as M;
    }
    const metric = make();
    metrics.set(name, metric);
    return metric;
  }

  return {
    counter: function counter(name, help) {
      return register(name, () => new Counter(name, help), 'counter');
    },
    gauge: function gauge(name, help, collect) {
      return register(name, () => new Gauge(name, help, collect), 'gauge');
    },
    histogram: function histogram(name, help, buckets) {
      return register(name, () => new Histogram(name, help, buckets), 'histogram');
    },
    render: function render() {
      const blocks: string[] = [];
      for (const m of metrics.values()) {
        blocks.push(`# HELP ${m.name} ${m.help.replace(/\\/g, '\\\\').replace(/\n/g, '\\n')}`, `# TYPE ${m.name} ${m.type}`, ...m.samples());
      }
      return `${blocks.join('\n')}\n`;
    },
  };
}

/** Names shared between the HTTP API and the bus, so both sides record into the same series. */
export const METRIC_NAMES = {
  httpRequests: 'ocellus_http_requests_total',
  httpDuration: 'ocellus_http_request_duration_seconds',
  devicesOnline: 'ocellus_devices_online',
  validationFailures: 'ocellus_validation_failures_total',
  mqttRejects: 'ocellus_mqtt_rejects_total',
  deviceLoginFailures: 'ocellus_device_login_failures_total',
  mqttOversizedPackets: 'ocellus_mqtt_oversized_packets_total',
  eventStreamsRefused: 'ocellus_event_streams_refused_total',
} as const;
