import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assignRelease } from '../../src/fleet/rollout/assign.js';
import type { HistoryInterval } from '../../src/fleet/history/intervals.js';
import type { ConnectionChange } from '../../src/store/device-connections.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';
import { tempDir, waitFor } from '../support/agent-fixtures.js';
import { startFleetRig, type FleetAgent, type FleetRig } from '../support/fleet-rig.js';
import { startFreezeProxy, type FreezeProxy } from '../support/freeze-proxy.js';

// Demo data: one greenhouse robot on a link that goes silent (out of radio coverage) and comes back.
const DEVICE = 'offline-hist-1';
let rig: FleetRig;
let proxy: FreezeProxy;
let unit: FleetAgent;
const agentDir = tempDir('offline-agent');
const link = () => ({ brokerUrl: proxy.url, keepaliveS: 1, reconnectMs: 200, dataDir: agentDir.path });

const changes = (): ConnectionChange[] => rig.store.deviceConnections.between(DEVICE, '1970-01-01T00:00:00.000Z', '9999-01-01T00:00:00.000Z');
const history = async (): Promise<HistoryInterval[]> => {
  const res = await rig.call('GET', `/api/v1/devices/${DEVICE}/history?from=${encodeURIComponent(new Date(Date.now() - 600_000).toISOString())}`);
  expect(res.status).toBe(200);
  return res.body.intervals as HistoryInterval[];
};
const switchesStored = () => sqliteHandle(rig.store).prepare("SELECT COUNT(*) AS n FROM device_events WHERE device_id = ? AND type = 'task-switched'").get(DEVICE) as { n: number };
const pause = (ms: number) => new Promise((r) => setTimeout(r, ms));

beforeAll(async () => {
  rig = await startFleetRig();
  proxy = await startFreezeProxy(rig.broker.host, rig.broker.port);
  rig.storeRelease('gh-off-1', 1);
  rig.enrol(DEVICE);
  unit = await rig.startAgent(DEVICE, link());
  await waitFor(() => unit.agent.connected(), 'agent connected');
  await assignRelease(rig.store, rig.bridge, { deviceId: DEVICE, releaseId: 'gh-off-1', actor: 'grower-anna#7', cause: 'manual' });
  await waitFor(() => unit.agent.state().releaseId === 'gh-off-1', 'release applied');
  await unit.agent.setTask('rows');
  await waitFor(() => switchesStored().n >= 1 && unit.agent.unackedEvents() === 0, 'switch stored');
}, 60_000);

afterAll(async () => {
  await rig?.close();
  await proxy?.close();
  agentDir.remove();
});

describe('offline time in a device history', () => {
  it('the first state message online is recorded as the device connecting', () => {
    expect(changes()).toMatchObject([{ online: true, cause: 'connected' }]);
  });

  it('a silent link: the broker drops it for missed keep-alives, the running interval ends there and an offline interval runs on', async () => {
    proxy.freeze();
    const frozenAt = Date.now();
    const off = await waitFor(() => changes().find((c) => !c.online), 'offline recorded', 15_000);
    expect(off.cause).toBe('keepalive-missed');
    // Dropped after 1.5 × the 1 s keep-alive, give or take a tick (MQTT 3.1.1 §3.1.2.10).
    expect(Date.parse(off.at) - frozenAt).toBeGreaterThanOrEqual(1000);
    expect(off).toMatchObject({ releaseId: 'gh-off-1', task: 'rows' });
    const list = await history();
    const last = list.at(-1)!;
    expect(last).toMatchObject({ kind: 'offline', task: null, releaseId: 'gh-off-1', lastKnownTask: 'rows', reason: 'keepalive-missed', end: null, start: off.at });
    const before = list.at(-2)!;
    expect(before).toMatchObject({ kind: 'profile', task: 'rows', end: off.at, reported: 'live' });
    const csv = await rig.call('GET', `/api/v1/devices/${DEVICE}/history?format=csv&from=${encodeURIComponent(new Date(Date.now() - 600_000).toISOString())}`);
    const rows = (csv.body as string).trim().split('\r\n');
    expect(rows[0]).toContain('kind,reported,lastKnownTask');
    expect(rows.at(-1)).toBe(`${DEVICE},,,,gh-off-1,${off.at},,keepalive-missed,,,,offline,live,rows`);
  });

  it('what the robot did while away, delivered when the link comes back, fills the offline stretch in on its own clock', async () => {
    await waitFor(() => !unit.agent.connected(), 'agent noticed the link is gone');
    await unit.agent.setTask('leaves');
    const switchedAt = Date.now();
    await pause(400);
    proxy.thaw();
    const back = await waitFor(() => changes().find((c) => c.online && c.cause === 'reconnected'), 'reconnection recorded', 15_000);
    await waitFor(() => unit.agent.unackedEvents() === 0, 'buffered events delivered');
    const off = changes().find((c) => !c.online)!;
    const list = await history();
    const tail = list.filter((i) => Date.parse(i.start) >= Date.parse(off.at) - 1);
    // The same agent process lived through it: no stretch stays unknown.
    expect(tail.some((i) => i.kind === 'offline')).toBe(false);
    expect(tail.map((i) => [i.task, i.reported])).toEqual([
      ['rows', 'after-the-fact'],
      ['leaves', 'after-the-fact'],
      ['leaves', 'live'],
    ]);
    expect(tail[0]!.start).toBe(off.at);
    expect(Math.abs(Date.parse(tail[1]!.start) - switchedAt)).toBeLessThan(1000);
    expect(tail[1]!.end).toBe(back.at);
    expect(tail[2]).toMatchObject({ start: back.at, end: null });
  });

  it('a robot restarted while away: its delivered events fill in what ran, the stretch the agent was down stays offline', async () => {
    proxy.freeze();
    await waitFor(() => changes().filter((c) => !c.online).length === 2, 'second offline recorded', 15_000);
    await waitFor(() => !unit.agent.connected(), 'agent noticed');
    await unit.agent.setTask('rows');
    await pause(300);
    await unit.agent.stop();
    const stoppedAt = Date.now();
    await pause(500);
    proxy.thaw();
    unit = await rig.startAgent(DEVICE, link());
    await waitFor(() => changes().filter((c) => c.online).length === 3, 'reconnection recorded', 15_000);
    await waitFor(() => unit.agent.unackedEvents() === 0, 'buffered events delivered');
    const off = changes().filter((c) => !c.online)[1]!;
    const back = changes().filter((c) => c.online)[2]!;
    const tail = (await history()).filter((i) => Date.parse(i.start) >= Date.parse(off.at) - 1);
    expect(tail.map((i) => [i.kind, i.task, i.reported])).toEqual([
      ['profile', 'leaves', 'after-the-fact'],
      ['profile', 'rows', 'after-the-fact'],
      ['offline', null, 'live'],
      ['profile', 'rows', 'after-the-fact'],
      ['profile', 'rows', 'live'],
    ]);
    // The gap runs from the old agent's last event to the new agent's first switch.
    const gap = tail[2]!;
    expect(Date.parse(gap.start)).toBeLessThanOrEqual(stoppedAt);
    expect(Date.parse(gap.end!)).toBeGreaterThan(stoppedAt);
    expect(tail[3]!.reason).toMatch(/startup|restore/);
    expect(tail[3]!.end).toBe(back.at);
    // Contiguous from start to end.
    for (let i = 1; i < tail.length; i++) expect(tail[i]!.start).toBe(tail[i - 1]!.end);
  });

  it('a clean shutdown is recorded as such', async () => {
    await unit.agent.stop();
    const off = await waitFor(() => changes().filter((c) => !c.online)[2], 'third offline recorded');
    expect(off.cause).toBe('clean-disconnect');
    const last = (await history()).at(-1)!;
    expect(last).toMatchObject({ kind: 'offline', reason: 'clean-disconnect', end: null, lastKnownTask: 'rows' });
  });
});
