/**
 * The fleet's engines follow the leader lock: started when it is gained (a fresh set each time), stopped when it
 * is lost. A real lease on a real SQLite file, an injected clock, and engines that record what was asked of them.
 */
import { afterEach, describe, expect, it } from 'vitest';
import { createLeaseLock } from '../../src/fleet/leader-lock.js';
import { startFleetDuties } from '../../src/server/fleet-duties.js';
import { openStore, type Store } from '../../src/store/index.js';
import { tempDir } from '../support/agent-fixtures.js';

const cleanup: Array<() => void> = [];
afterEach(() => {
  for (const c of cleanup.splice(0)) c();
});

function rig() {
  const dir = tempDir('duties');
  const stores: Store[] = [openStore(dir.path), openStore(dir.path)];
  cleanup.push(() => (stores.forEach((s) => s.close()), dir.remove()));
  let nowMs = Date.parse('2026-03-02T06:00:00Z');
  const clock = { now: () => new Date(nowMs) };
  const events: string[] = [];
  let made = 0;
  const duties = (store: Store, holder: string) => {
    const lock = createLeaseLock({ leases: store.leaderLeases, name: 'fleet-engines', holder, clock, pollMs: 1000 });
    const d = startFleetDuties({
      lock,
      log: () => {},
      makeEngines: () => {
        const n = ++made;
        return { start: () => void events.push(`${holder} start #${n}`), stop: async () => void events.push(`${holder} stop #${n}`) };
      },
    });
    return { lock, duties: d };
  };
  return { stores, duties, events, advance: (ms: number) => (nowMs += ms) };
}

const settle = () => new Promise((r) => setImmediate(r));

describe('fleet duties follow the leader lock', () => {
  it('start the engines on the replica that gains the lock, stop them when it is lost, and start a fresh set on the next holder', async () => {
    const r = rig();
    const a = r.duties(r.stores[0]!, 'replica-a');
    const b = r.duties(r.stores[1]!, 'replica-b');
    await settle();
    expect(r.events).toEqual(['replica-a start #1']);
    expect([a.duties.leading(), b.duties.leading()]).toEqual([true, false]);

    // A stalls: it renews no more. B takes the lease once it expired; A, polling again, learns it lost it.
    r.advance(5000);
    b.lock.poll();
    a.lock.poll();
    await settle();
    expect(r.events).toEqual(['replica-a start #1', 'replica-b start #2', 'replica-a stop #1']);
    expect([a.duties.leading(), b.duties.leading()]).toEqual([false, true]);

    await b.duties.stop();
    await a.duties.stop();
    expect(r.events.at(-1)).toBe('replica-b stop #2');
  });
});
