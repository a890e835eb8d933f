import type { LeaderLock } from '../fleet/leader-lock.js';

/** The engines that act for the whole fleet: started while this server holds the leader lock, stopped when it loses it. */
export interface FleetEngines {
  start(): void;
  stop(): Promise<void>;
}

export interface FleetDuties {
  /** Whether this server runs the fleet's engines now. */
  leading(): boolean;
  /** Stops the engines and the lock (giving the lease up). */
  stop(): Promise<void>;
}

/**
 * Runs the fleet's engines (rollouts, calibration and drift) only while `lock` is held. Every time it is
 * gained a fresh set is made from the stored state, so what one holder remembered never carries over to the
 * next: a takeover continues each rollout from the database. When the lock is lost the engines stop; they
 * stop acting before that through their own fence (the same lock), so a lost lease means no further assignment
 * batch even while a pass is still winding down.
 */
export function startFleetDuties(options: { lock: LeaderLock; makeEngines: () => FleetEngines; log: (line: string) => void }): FleetDuties {
  const { lock, makeEngines, log } = options;
  let current: FleetEngines | null = null;
  // Start and stop run one after another, in the order the lock changed.
  let chain: Promise<void> = Promise.resolve();
  let stopped = false;

  function onChange(held: boolean) {
    chain = chain.then(async () => {
      if (held && !current && !stopped && lock.held()) {
        current = makeEngines();
        current.start();
        log('fleet: this server runs the rollout and calibration engines');
      } else if (!held && current) {
        const engines = current;
        current = null;
        await engines.stop().catch((e: unknown) => log(`fleet: engines did not stop cleanly: ${(e as Error).message}`));
        log('fleet: this server stopped the rollout and calibration engines (the leader lock is elsewhere)');
      }
    });
  }

  const unsubscribe = lock.onChange(onChange);
  lock.start();
  if (lock.held()) onChange(true);

  return {
    leading: () => current !== null && lock.held(),
    stop: async function stop() {
      stopped = true;
      unsubscribe();
      await chain;
      const engines = current;
      current = null;
      await engines?.stop();
      lock.stop();
    },
  };
}
