/**
 * How long the outbox waits for an ack to advance before it resends: TCP's retransmission timeout
 * (RFC 6298), in milliseconds. It follows the measured round trip, so a server with a deep queue is
 * given the time it needs instead of being sent the same events again; it doubles while nothing
 * advances; `minMs` (the configured ack timeout) is the floor and `maxMs` the cap.
 */
export interface ResendTimeout {
  currentMs(): number;
  /** A round trip measured on events sent once (Karn's rule: never on resent ones). */
  sample(rttMs: number): void;
  /** No ack advanced for a whole timeout: double it (RFC 6298 §5.5), up to the cap. */
  backOff(): void;
  /** An ack advanced: back from any doubling to the estimate. */
  progressed(): void;
}

// RFC 6298 §2: alpha = 1/8, beta = 1/4, K = 4.
const ALPHA = 1 / 8;
const BETA = 1 / 4;
const K = 4;

/** RFC 6298 §2.2–2.3: RTO = SRTT + max(G, K·RTTVAR), bounded to [minMs, maxMs] (G, the clock granularity, is 1 ms here). */
export function createResendTimeout(minMs: number, maxMs: number): ResendTimeout {
  const cap = Math.max(minMs, maxMs);
  let srttMs: number | null = null;
  let rttvarMs = 0;
  let backedOffMs: number | null = null;
  const estimateMs = () => (srttMs === null ? minMs : Math.min(cap, Math.max(minMs, srttMs + Math.max(1, K * rttvarMs))));

  return {
    currentMs: () => backedOffMs ?? estimateMs(),
    sample: function sample(rttMs) {
      if (!(rttMs >= 0)) return;
      if (srttMs === null) {
        srttMs = rttMs;
        rttvarMs = rttMs / 2;
      } else {
        rttvarMs = (1 - BETA) * rttvarMs + BETA * Math.abs(srttMs - rttMs);
        srttMs = (1 - ALPHA) * srttMs + ALPHA * rttMs;
      }
    },
    backOff: function backOff() {
      backedOffMs = Math.min(cap, 2 * (backedOffMs ?? estimateMs()));
    },
    progressed: function progressed() {
      backedOffMs = null;
    },
  };
}
