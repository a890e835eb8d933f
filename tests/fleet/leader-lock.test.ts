/**
 * The leader lock of replicas: a lease row with an expiry, opened by two stores (as two server processes open
 * it) on each backend: one SQLite file, and one PostgreSQL schema on 127.0.0.1:5432 (skipped, saying so, when it
 * is not running); on an injected clock. Lease and poll figures are this project's
 * defaults (poll 1 s, lease 5 polls), not a published value.
 */
import { afterEach, describe, expect, it } from 'vitest';
import { createLeaseLock, type LeaderLock } from '../../src/fleet/leader-lock.js';
import { openStore, type Store } from '../../src/store/index.js';
import { portOpen, tempDir } from '../support/agent-fixtures.js';
import { postgresUrlFor } from '../support/store-backend.js';

const postgresUp = await portOpen(5432);
if (!postgresUp) console.warn('leader lock: PostgreSQL is not listening on 127.0.0.1:5432, so the PostgreSQL run is skipped');
const BACKENDS = ['sqlite', ...(postgresUp ? ['postgres' as const] : [])] as const;

const opened: Array<{ stores: Store[]; dir: ReturnType<typeof tempDir> }> = [];
afterEach(() => {
  for (const o of opened.splice(0)) {
    for (const s of o.stores) s.close();
    o.dir.remove();
  }
});

function twoReplicas(backend: string) {
  const dir = tempDir('leader');
  const options = backend === 'postgres' ? { databaseUrl: postgresUrlFor(dir.path) } : {};
  const a = openStore(dir.path, options);
  const b = openStore(dir.path, options);
  opened.push({ stores: [a, b], dir });
  let nowMs = Date.parse('2026-03-02T06:00:00Z');
  const clock = { now: () => new Date(nowMs) };
  const lock = (store: Store, holder: string): LeaderLock => createLeaseLock({ leases: store.leaderLeases, name: 'fleet-engines', holder, clock, pollMs: 1000 });
  return { a, b, lockA: lock(a, 'replica-a'), lockB: lock(b, 'replica-b'), advance: (ms: number) => (nowMs += ms) };
}

describe.each(BACKENDS)('%s: leader lock (lease row)', (backend) => {
  it('is acquired by the first replica to poll and held while it renews', () => {
    const r = twoReplicas(backend);
    expect(r.lockA.poll()).toBe(true);
    for (let i = 0; i < 10; i++) {
      r.advance(1000);
      expect(r.lockA.poll()).toBe(true);
    }
    expect(r.a.leaderLeases.get('fleet-engines')).toMatchObject({ holder: 'replica-a', fence: 1 });
  });

  it('is exclusive: the other replica does not get it while the holder renews', () => {
    const r = twoReplicas(backend);
    r.lockA.poll();
    for (let i = 0; i < 10; i++) {
      r.advance(1000);
      r.lockA.poll();
      expect(r.lockB.poll()).toBe(false);
      expect(r.lockB.held()).toBe(false);
    }
  });

  it('is released by a clean stop, and the other replica takes it at its next poll', () => {
    const r = twoReplicas(backend);
    r.lockA.poll();
    r.lockA.stop();
    expect(r.lockA.held()).toBe(false);
    expect(r.lockB.poll()).toBe(true);
    expect(r.b.leaderLeases.get('fleet-engines')).toMatchObject({ holder: 'replica-b', fence: 2 });
  });

  it('is taken over once a holder that stopped renewing (a killed process) has let its lease expire', () => {
    const r = twoReplicas(backend);
    r.lockA.poll();
    // A dies: it renews no more. Within the lease (5 s) B still waits; the lease ends 5 s after A's last renewal.
    r.advance(4999);
    expect(r.lockB.poll()).toBe(false);
    r.advance(1);
    expect(r.lockB.poll()).toBe(true);
    // A, had it only stalled, already counted itself out one poll before the expiry: the two never both act.
    expect(r.lockA.held()).toBe(false);
    r.advance(1);
    expect(r.lockA.poll()).toBe(false);
  });

  it('stops counting itself leader one poll interval before its lease could expire, even without a poll', () => {
    const r = twoReplicas(backend);
    r.lockA.poll();
    r.advance(3999);
    expect(r.lockA.held()).toBe(true);
    r.advance(1);
    expect(r.lockA.held()).toBe(false);
  });

  it('drops the lock at once when its connection to the database is gone, and tells its listeners', () => {
    const r = twoReplicas(backend);
    const seen: boolean[] = [];
    r.lockA.onChange((held) => seen.push(held));
    r.lockA.poll();
    r.a.close();
    r.advance(1000);
    expect(r.lockA.poll()).toBe(false);
    expect(r.lockA.held()).toBe(false);
    expect(seen).toEqual([true, false]);
  });

  it('refuses a lease that does not outlast two polls', () => {
    const r = twoReplicas(backend);
    expect(() => createLeaseLock({ leases: r.a.leaderLeases, name: 'x', holder: 'h', clock: { now: () => new Date() }, pollMs: 1000, leaseMs: 2000 })).toThrow(/more than two polls/);
  });
});
