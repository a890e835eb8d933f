import type { MetricsRegistry } from '../metrics/registry.js';
import { METRIC_NAMES } from '../metrics/registry.js';
import type { RejectReason } from '../protocol/decode.js';

/** Why the bridge dropped a message: the decoder's reasons, plus a sender that is not an enrolled device. */
export type BridgeRejectReason = RejectReason | 'unknown-device';

export interface RejectCounter {
  record(reason: BridgeRejectReason, topic: string, detail: string): void;
  counts(): Record<BridgeRejectReason, number>;
}

/**
 * Counts rejected messages by reason and logs them without flooding the log: the first few of each
 * reason in full, then one line at every power of ten.
 */
export function createRejectCounter(metrics?: MetricsRegistry, log: (line: string) => void = () => {}): RejectCounter {
  const counts: Record<BridgeRejectReason, number> = {
    oversized: 0,
    'malformed-json': 0,
    'unknown-version': 0,
    'wrong-schema': 0,
    'unknown-device': 0,
  };
  const counter = metrics?.counter(METRIC_NAMES.mqttRejects, 'MQTT messages the server dropped, by reason');
  return {
    record: function record(reason, topic, detail) {
      counts[reason] += 1;
      counter?.inc({ reason });
      const n = counts[reason];
      if (n <= 3) log(`bus: rejected message on ${topic} (${reason}): ${detail}`);
      else if (/^10+$/.test(String(n))) log(`bus: ${n} messages rejected so far as ${reason}`);
    },
    counts: function snapshot() {
      return { ...counts };
    },
  };
}
