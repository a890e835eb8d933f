import { z } from 'zod';

/** Something changed in the fleet: the bus stored devices' state or events, or a change was made through the API. */
export type FleetChange =
  | { kind: 'devices'; deviceIds: string[] }
  | { kind: 'api'; method: string; route: string; path: string };

/** The same shape as a schema, for changes relayed from another replica (checked before they reach listeners). */
export const fleetChangeSchema = z.discriminatedUnion('kind', [
  z.object({ kind: z.literal('devices'), deviceIds: z.array(z.string().max(64)).max(100_000) }),
  z.object({ kind: z.literal('api'), method: z.string().max(16), route: z.string().max(512), path: z.string().max(2048) }),
]);

export type ChangeListener = (change: FleetChange) => void;

/** An in-memory fan-out of fleet changes to whoever listens (the console's live updates). */
export interface ChangeFeed {
  publish(change: FleetChange): void;
  /** Returns the function that stops listening. */
  subscribe(listener: ChangeListener): () => void;
  listenerCount(): number;
}

export function createChangeFeed(): ChangeFeed {
  const listeners = new Set<ChangeListener>();
  return {
    publish: function publishChange(change) {
      for (const listener of [...listeners]) {
        try {
          listener(change);
        } catch {
          // One broken listener (a closed stream) must not keep the change from the others.
          listeners.delete(listener);
        }
      }
    },
    subscribe: function subscribeToChanges(listener) {
      listeners.add(listener);
      return function unsubscribe() {
        listeners.delete(listener);
      };
    },
    listenerCount: () => listeners.size,
  };
}
