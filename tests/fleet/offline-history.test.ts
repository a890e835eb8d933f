import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { assignRelease } from '../../src/fleet/rollout/assign.js';
import type { HistoryInterval } from '../../src/fleet/history/intervals.js';
import type { ConnectionChange } from '../../src/store/device-connections.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';
import { tempDir, waitFor } from '../support/agent-fixtures.js';
import { startFleetRig, type FleetAgent, type FleetRig } from '../support/fleet-rig.js';
import { startFreezeProxy, type FreezeProxy } from '../support/freeze-proxy.js';

// Demo data: greenhouse robots on links that go silent (out of radio coverage) and come back. The rig (server,
// broker, bridge) is shared; every test has its own robot, its own link and its own agent data directory, and
// waits on the events that matter (stored changes, buffered events), never on a fixed pause.
let rig: FleetRig;
const RELEASE = 'gh-off-1';
let nextUnit = 0;

/** One robot online through its own silent-able link, release applied and running `task`. */
interface Away {
  deviceId: string;
  proxy: FreezeProxy;
  unit: FleetAgent;
  /** Starts the robot's agent again on the same data directory (a restart: the buffered events survive it). */
  restart(): Promise<FleetAgent>;
  changes(): ConnectionChange[];
  history(): Promise<HistoryInterval[]>;
  close(): Promise<void>;
}
let current: Away | null = null;

async function robotOnline(task: string): Promise<Away> {
  const deviceId = `offline-hist-${++nextUnit}`;
  const proxy = await startFreezeProxy(rig.broker.host, rig.broker.port);
  const agentDir = tempDir(`offline-agent-${nextUnit}`);
  const link = () => ({ brokerUrl: proxy.url, keepaliveS: 1, reconnectMs: 200, dataDir: agentDir.path });
  const switchesStored = () =>
    (sqliteHandle(rig.store).prepare("SELECT COUNT(*) AS n FROM device_events WHERE device_id = ? AND type = 'task-switched'").get(deviceId) as { n: number }).n;
  rig.enrol(deviceId);
  const away: Away = {
    deviceId,
    proxy,
    unit: await rig.startAgent(deviceId, link()),
    restart: async () => (away.unit = await rig.startAgent(deviceId, link())),
    changes: () => rig.store.deviceConnections.between(deviceId, '1970-01-01T00:00:00.000Z', '9999-01-01T00:00:00.000Z'),
    history: async () => {
      const res = await rig.call('GET', `/api/v1/devices/${deviceId}/history?from=${encodeURIComponent(new Date(Date.now() - 600_000).toISOString())}`);
      expect(res.status).toBe(200);
      return res.body.intervals as HistoryInterval[];
    },
    close: async () => {
      await away.unit.agent.stop();
      await proxy.close();
      agentDir.remove();
    },
  };
  current = away;
  await waitFor(() => away.unit.agent.connected(), `${deviceId} connected`);
  await assignRelease(rig.store, rig.bridge, { deviceId, releaseId: RELEASE, actor: 'grower-anna#7', cause: 'manual' });
  await waitFor(() => away.unit.agent.state().releaseId === RELEASE, `${deviceId} applied the release`);
  await away.unit.agent.setTask(task);
  await waitFor(() => switchesStored() >= 1 && away.unit.agent.unackedEvents() === 0, `${deviceId} switch stored`);
  return away;
}

/** Freezes the robot's link and waits until the broker dropped it (stored) and the agent noticed. */
async function goAway(a: Away, offlineCount: number): Promise<ConnectionChange> {
  a.proxy.freeze();
  const off = await waitFor(() => a.changes().filter((c) => !c.online)[offlineCount - 1], `offline #${offlineCount} recorded`, 15_000);
  await waitFor(() => !a.unit.agent.connected(), 'agent noticed the link is gone');
  return off;
}

/** Waits until the agent has logged `n` more events than it had (offline, they stay buffered: the count only grows). */
async function moreEventsLogged(a: Away, n: number, what: string): Promise<void> {
  const before = a.unit.agent.unackedEvents();
  await waitFor(() => a.unit.agent.unackedEvents() >= before + n, what, 15_000);
}

beforeAll(async () => {
  rig = await startFleetRig();
  rig.storeRelease(RELEASE, 1);
}, 60_000);

afterEach(async () => {
  const a = current;
  current = null;
  await a?.close();
});

afterAll(async () => {
  await rig?.close();
});

describe('offline time in a device history', () => {
  it('the first state message online is recorded as the device connecting', async () => {
    const a = await robotOnline('rows');
    expect(a.changes()).toMatchObject([{ online: true, cause: 'connected' }]);
  }, 60_000);

  it('a silent link: the broker drops it for missed keep-alives, the running interval ends there and an offline interval runs on', async () => {
    const a = await robotOnline('rows');
    a.proxy.freeze();
    const frozenAt = Date.now();
    const off = await waitFor(() => a.changes().find((c) => !c.online), 'offline recorded', 15_000);
    expect(off.cause).toBe('keepalive-missed');
    // Dropped after 1.5 × the 1 s keep-alive, give or take a tick (MQTT 3.1.1 §3.1.2.10).
    expect(Date.parse(off.at) - frozenAt).toBeGreaterThanOrEqual(1000);
    expect(off).toMatchObject({ releaseId: RELEASE, task: 'rows' });
    const list = await a.history();
    const last = list.at(-1)!;
    expect(last).toMatchObject({ kind: 'offline', task: null, releaseId: RELEASE, lastKnownTask: 'rows', reason: 'keepalive-missed', end: null, start: off.at });
    const before = list.at(-2)!;
    expect(before).toMatchObject({ kind: 'profile', task: 'rows', end: off.at, reported: 'live' });
    const csv = await rig.call('GET', `/api/v1/devices/${a.deviceId}/history?format=csv&from=${encodeURIComponent(new Date(Date.now() - 600_000).toISOString())}`);
    const rows = (csv.body as string).trim().split('\r\n');
    expect(rows[0]).toContain('kind,reported,lastKnownTask');
    expect(rows.at(-1)).toBe(`${a.deviceId},,,,${RELEASE},${off.at},,keepalive-missed,,,,offline,live,rows`);
  }, 60_000);

  it('what the robot did while away, delivered when the link comes back, fills the offline stretch in on its own clock', async () => {
    const a = await robotOnline('rows');
    const off = await goAway(a, 1);
    await a.unit.agent.setTask('leaves');
    const switchedAt = Date.now();
    // The robot works on while away: the switch and a telemetry sample after it wait in its buffer.
    await moreEventsLogged(a, 1, 'telemetry after the switch buffered');
    a.proxy.thaw();
    const back = await waitFor(() => a.changes().find((c) => c.online && c.cause === 'reconnected'), 'reconnection recorded', 15_000);
    await waitFor(() => a.unit.agent.unackedEvents() === 0, 'buffered events delivered', 15_000);
    const tail = (await a.history()).filter((i) => Date.parse(i.start) >= Date.parse(off.at) - 1);
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
  }, 60_000);

  it('a robot restarted while away: its delivered events fill in what ran, the stretch the agent was down stays offline', async () => {
    const a = await robotOnline('leaves');
    const off = await goAway(a, 1);
    await a.unit.agent.setTask('rows');
    const switchedAt = Date.now();
    // The old agent's run on 'rows' lasts until its last event: a telemetry sample logged once the clock has
    // moved past the switch, so the run is at least a millisecond long.
    await waitFor(() => Date.now() > switchedAt, 'the clock moved past the switch', 5_000);
    await moreEventsLogged(a, 1, 'telemetry after the switch buffered');
    await a.unit.agent.stop();
    const stoppedAt = Date.now();
    // It comes back up still out of coverage (new connections are refused while frozen), so its start-up
    // switch is on its own clock before the link returns: agent.start() resolves once that switch is logged.
    await a.restart();
    await waitFor(() => Date.now() > stoppedAt, 'the clock moved past the stop', 5_000);
    a.proxy.thaw();
    await waitFor(() => a.changes().filter((c) => c.online).length === 2, 'reconnection recorded', 15_000);
    await waitFor(() => a.unit.agent.unackedEvents() === 0, 'buffered events delivered', 15_000);
    const back = a.changes().filter((c) => c.online)[1]!;
    const tail = (await a.history()).filter((i) => Date.parse(i.start) >= Date.parse(off.at) - 1);
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
  }, 90_000);

  it('a clean shutdown is recorded as such', async () => {
    const a = await robotOnline('rows');
    await a.unit.agent.stop();
    const off = await waitFor(() => a.changes().find((c) => !c.online), 'offline recorded');
    expect(off.cause).toBe('clean-disconnect');
    const last = (await a.history()).at(-1)!;
    expect(last).toMatchObject({ kind: 'offline', reason: 'clean-disconnect', end: null, lastKnownTask: 'rows' });
  }, 60_000);
});
