/**
 * Fault: the server process is killed with SIGKILL while agent processes stream events, then started again
 * on the same data folder. Every event an agent counted as acknowledged must be stored exactly once, and the
 * agents' backlog must arrive after the restart. (Demo data: greenhouse scout A robots.)
 */
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { waitFor } from '../support/agent-fixtures.js';
import { startFaultSite, type FaultSite } from '../support/fault-rig.js';

const ROBOTS = ['gh-kill-01', 'gh-kill-02', 'gh-kill-03'];
let site: FaultSite | null = null;

afterAll(async () => {
  await site?.close();
});

/** Per device: how many events are stored, the highest seq, and how many distinct seqs (the key is (device, seq)). */
function storedByDevice(s: FaultSite): Map<string, { count: number; maxSeq: number }> {
  return s.readDb((db) => {
    const rows = db.prepare('SELECT device_id AS id, COUNT(*) AS count, MAX(seq) AS maxSeq FROM device_events GROUP BY device_id').all() as Array<{ id: string; count: number; maxSeq: number }>;
    return new Map(rows.map((r) => [r.id, { count: r.count, maxSeq: r.maxSeq }]));
  });
}

function logLines(s: FaultSite, deviceId: string): number {
  const file = join(s.agentDir(deviceId), 'events.log');
  return existsSync(file) ? readFileSync(file, 'utf8').split('\n').filter(Boolean).length : 0;
}

describe('server killed (SIGKILL) while agents stream events', () => {
  it('stores every acknowledged event exactly once, and the backlog after the restart', async () => {
    site = await startFaultSite('kill');
    const s = site;
    // Telemetry every 50 ms: each agent logs about 20 events a second.
    for (const id of ROBOTS) await s.startRobot(id, ['--telemetry-interval-s', '0.05']);
    for (const id of ROBOTS) await s.api.json('POST', `/api/v1/devices/${id}/assign`, { releaseId: s.releaseA });
    await waitFor(() => ROBOTS.every((id) => (storedByDevice(s).get(id)?.count ?? 0) >= 40), 'every robot to have 40 events stored', 60_000, 100);

    await s.server.kill();
    // The agents keep logging while the server is gone: wait until each holds a backlog on disk.
    const before = new Map(ROBOTS.map((id) => [id, logLines(s, id)]));
    await waitFor(() => ROBOTS.every((id) => logLines(s, id) >= before.get(id)! + 20), 'every agent to log 20 events while the server is down', 30_000, 50);
    const storedAtKill = storedByDevice(s);

    await s.restartServer();
    await waitFor(
      () => {
        const now = storedByDevice(s);
        return ROBOTS.every((id) => (now.get(id)?.maxSeq ?? 0) >= storedAtKill.get(id)!.maxSeq + 40);
      },
      'every robot to have 40 more events stored after the restart',
      60_000,
      100,
    );

    // A clean stop makes each agent write the highest seq the server acknowledged to events-acked.json.
    for (const a of s.agents) expect(await a.stop()).toBe(0);
    const stored = storedByDevice(s);
    for (const id of ROBOTS) {
      const acked = (JSON.parse(readFileSync(join(s.agentDir(id), 'events-acked.json'), 'utf8')) as { ackedUpTo: number }).ackedUpTo;
      expect(acked, id).toBeGreaterThan(storedAtKill.get(id)!.maxSeq);
      const ackedStored = s.readDb((db) => (db.prepare('SELECT COUNT(*) AS n FROM device_events WHERE device_id = ? AND seq BETWEEN 1 AND ?').get(id, acked) as { n: number }).n);
      // Exactly once: every seq 1..acked is there; (device, seq) is the table's key, so none is there twice.
      expect(ackedStored, `${id}: events 1..${acked} stored`).toBe(acked);
      // Nothing is stored that the agent never logged.
      expect(stored.get(id)!.maxSeq).toBeLessThanOrEqual(acked + logLines(s, id));
    }
  });
});
