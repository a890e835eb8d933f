/** Largest payload accepted on each channel, in bytes. A signed release is the only large message. */
export const MAX_PAYLOAD_BYTES = {
  release: 512 * 1024,
  cmd: 16 * 1024,
  state: 16 * 1024,
  events: 256 * 1024,
  ack: 1024,
} as const;

/** Largest freshness statement (with a key chain of up to 32 rotations, a few hundred bytes each). */
export const MAX_FRESHNESS_BYTES = 64 * 1024;

/** Most events one batch may carry. */
export const MAX_EVENTS_PER_BATCH = 500;
