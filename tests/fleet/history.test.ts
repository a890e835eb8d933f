import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assignRelease } from '../../src/fleet/rollout/assign.js';
import { createHistoryReader, type HistoryInterval } from '../../src/fleet/history/intervals.js';
import { openStore } from '../../src/store/index.js';
import { waitFor } from '../support/agent-fixtures.js';
import { startFleetRig, type FleetAgent, type FleetRig } from '../support/fleet-rig.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

let rig: FleetRig;
let unit: FleetAgent;
const DEVICE = 'hist-1';

type SwitchRow = { seq: number; ts: string; event: string };
const switches = () =>
  (sqliteHandle(rig.store).prepare("SELECT seq, ts, event FROM device_events WHERE device_id = ? AND type = 'task-switched' ORDER BY seq").all(DEVICE) as SwitchRow[]).map((r) => ({
    seq: r.seq,
    ts: r.ts,
    ...(JSON.parse(r.event) as { toTask: string; profileId: string; profileRevision: number; releaseId: string; reason: string }),
  }));

/** Contiguous: each interval ends where the next starts; non-overlapping: starts strictly increase. */
function expectContiguous(list: HistoryInterval[]) {
  for (let i = 1; i < list.length; i++) {
    expect(list[i - 1]!.end).toBe(list[i]!.start);
    expect(Date.parse(list[i]!.start)).toBeGreaterThanOrEqual(Date.parse(list[i - 1]!.start));
  }
}

beforeAll(async () => {
  rig = await startFleetRig();
  rig.storeRelease('gh-hist-1', 1);
  rig.storeRelease('gh-hist-2', 2);
  rig.enrol(DEVICE);
  unit = await rig.startAgent(DEVICE);
  await waitFor(() => unit.agent.connected(), 'agent connected');
  await assignRelease(rig.store, rig.bridge, { deviceId: DEVICE, releaseId: 'gh-hist-1', actor: 'grower-anna#7', cause: 'manual' });
  await waitFor(() => unit.agent.state().releaseId === 'gh-hist-1', 'release 1 applied');
  for (const task of ['leaves', 'rows', 'leaves']) {
    // Each switch in a millisecond of its own, so their times order them.
    const afterMs = Date.now();
    await waitFor(() => Date.now() > afterMs, 'the clock past the last switch', 1_000, 1);
    expect(await unit.agent.setTask(task)).toMatchObject({ ok: true });
  }
  // A rollout moves it to release 2.
  const created = await rig.call('POST', '/api/v1/rollouts', { releaseId: 'gh-hist-2', target: { deviceIds: [DEVICE] }, gate: { telemetryFrames: 0 } });
  expect(created.status).toBe(201);
  await rig.driveRollout(created.body.id, (r) => r.status !== 'running', 'the rollout finished', 30_000);
  await waitFor(() => unit.agent.state().releaseId === 'gh-hist-2', 'release 2 applied');
  // The new release keeps the active task (leaves); then the robot goes back to the rows.
  await unit.agent.setTask('rows');
  await waitFor(() => switches().length >= 6, 'six switches stored');
}, 60_000);

afterAll(async () => {
  await rig?.close();
});

describe('history of which profile ran when (from task-switched events)', () => {
  it('intervals are contiguous, never overlap and match the switch events one to one', async () => {
    const events = switches();
    const from = new Date(Date.parse(events[0]!.ts) - 60_000).toISOString();
    const res = await rig.call('GET', `/api/v1/devices/${DEVICE}/history?from=${encodeURIComponent(from)}`);
    expect(res.status).toBe(200);
    const list = res.body.intervals as HistoryInterval[];
    expect(list.map((i) => ({ seq: i.seq, start: i.start, task: i.task, releaseId: i.releaseId, reason: i.reason }))).toEqual(
      events.map((e) => ({ seq: e.seq, start: e.ts, task: e.toTask, releaseId: e.releaseId, reason: e.reason })),
    );
    expectContiguous(list);
    expect(list.at(-1)!.end).toBe(null);
    expect(list.map((i) => i.task)).toEqual(['rows', 'leaves', 'rows', 'leaves', 'leaves', 'rows']);
  });

  it('joins each interval with the change that brought its release: a person, or a rollout and its creator', async () => {
    const res = await rig.call('GET', `/api/v1/devices/${DEVICE}/history?from=${encodeURIComponent(switches()[0]!.ts)}`);
    const list = res.body.intervals as HistoryInterval[];
    expect(list[0]!.cause!).toMatchObject({ releaseId: 'gh-hist-1', actor: 'grower-anna#7', assignment: 'manual' });
    expect(list[0]!.cause?.rolloutId).toBeUndefined();
    const viaRollout = list.find((i) => i.releaseId === 'gh-hist-2')!;
    expect(viaRollout.reason).toBe('release');
    expect(viaRollout.cause?.rolloutId).toMatch(/^ro-/);
    expect(viaRollout.cause?.actor).toMatch(/^fleet test operator#/);
  });

  it('clips to the window: the interval running at `from` starts at `from`, one running past `to` ends at `to`', () => {
    const events = switches();
    const reader = createHistoryReader(rig.store);
    const fromMs = (Date.parse(events[1]!.ts) + Date.parse(events[2]!.ts)) / 2;
    const toMs = (Date.parse(events[3]!.ts) + Date.parse(events[4]!.ts)) / 2;
    const list = reader.device(DEVICE, { fromMs, toMs, nowMs: Date.now() });
    expect(list.map((i) => i.seq)).toEqual([events[1]!.seq, events[2]!.seq, events[3]!.seq]);
    expect(list[0]!.start).toBe(new Date(fromMs).toISOString());
    expect(list.at(-1)!.end).toBe(new Date(toMs).toISOString());
    expectContiguous(list);
    // A window after the last switch holds only the running interval, still open.
    const later = reader.device(DEVICE, { fromMs: Date.now() - 1, toMs: Date.now() + 60_000, nowMs: Date.now() });
    expect(later).toHaveLength(1);
    expect(later[0]!.end).toBe(null);
    expect(later[0]!.seq).toBe(events.at(-1)!.seq);
  });

  it('per task and per release across devices, and CSV (RFC 4180) on request', async () => {
    const from = encodeURIComponent(new Date(Date.parse(switches()[0]!.ts) - 1000).toISOString());
    const task = await rig.call('GET', `/api/v1/history/tasks/leaves?from=${from}`);
    expect(task.body.intervals.every((i: HistoryInterval) => i.task === 'leaves')).toBe(true);
    expect(task.body.intervals).toHaveLength(3);
    const release = await rig.call('GET', `/api/v1/history/releases/gh-hist-2?from=${from}`);
    expect(release.body.intervals.map((i: HistoryInterval) => i.releaseId)).toEqual(['gh-hist-2', 'gh-hist-2']);
    const csv = await rig.call('GET', `/api/v1/devices/${DEVICE}/history?from=${from}&format=csv`);
    expect(csv.status).toBe(200);
    const lines = (csv.body as string).split('\r\n');
    expect(lines[0]).toBe('deviceId,task,profileId,profileRevision,releaseId,start,end,reason,causeRolloutId,causeActor,causeAssignment,kind,reported,lastKnownTask');
    expect(lines).toHaveLength(switches().length + 2); // header, one line per interval, and the empty string after the last CRLF
    expect(lines[1]!.startsWith(`${DEVICE},rows,rows-net-profile,1,gh-hist-1,`)).toBe(true);
  });

  it('refuses a window that ends before it starts, naming the field', async () => {
    const bad = await rig.call('GET', `/api/v1/devices/${DEVICE}/history?from=2025-01-02T00:00:00Z&to=2025-01-01T00:00:00Z`);
    expect(bad.status).toBe(400);
    expect(bad.body.issues[0].path).toBe('from');
    const junk = await rig.call('GET', `/api/v1/devices/${DEVICE}/history?from=yesterday`);
    expect(junk.status).toBe(400);
    expect(junk.body.issues[0].path).toBe('from');
    expect((await rig.call('GET', '/api/v1/devices/nobody/history')).status).toBe(404);
  });

  it('usage per day and task sums the telemetry windows: seconds, frames and energy in joules', async () => {
    await waitFor(
      () => (sqliteHandle(rig.store).prepare("SELECT COUNT(*) AS n FROM device_events WHERE device_id = ? AND type = 'telemetry'").get(DEVICE) as { n: number }).n >= 3,
      'telemetry stored',
    );
    const rows = sqliteHandle(rig.store).prepare("SELECT ts, event FROM device_events WHERE device_id = ? AND type = 'telemetry' ORDER BY seq").all(DEVICE) as Array<{ ts: string; event: string }>;
    const t = rows.map((r) => JSON.parse(r.event) as { frames: number; windowS: number; frameEnergyMjMean: number });
    // The window ends just after the last window read here, so later telemetry does not count.
    const from = new Date(Date.parse(rows[0]!.ts) - 1).toISOString();
    const to = new Date(Date.parse(rows.at(-1)!.ts) + 1).toISOString();
    const res = await rig.call('GET', `/api/v1/devices/${DEVICE}/usage?from=${encodeURIComponent(from)}&to=${encodeURIComponent(to)}`);
    expect(res.status).toBe(200);
    const days = res.body.days as Array<{ day: string; task: string; seconds: number; frames: number; energyJ: number; windows: number }>;
    const sum = (f: (d: (typeof days)[number]) => number) => days.reduce((a, d) => a + f(d), 0);
    expect(sum((d) => d.windows)).toBe(t.length);
    expect(sum((d) => d.frames)).toBe(t.reduce((a, w) => a + w.frames, 0));
    expect(sum((d) => d.seconds)).toBeCloseTo(t.reduce((a, w) => a + w.windowS, 0), 9);
    // Energy: frames × mJ per frame ÷ 1000 = J (SI prefixes).
    expect(sum((d) => d.energyJ)).toBeCloseTo(t.reduce((a, w) => a + (w.frames * w.frameEnergyMjMean) / 1000, 0), 9);
    expect(days.every((d) => /^\d{4}-\d{2}-\d{2}$/.test(d.day) && (d.task === 'rows' || d.task === 'leaves'))).toBe(true);
  });

  it('survives a restart: the same intervals from the database opened again', async () => {
    const events = switches();
    const window = { fromMs: Date.parse(events[0]!.ts) - 1000, toMs: Date.parse(events.at(-1)!.ts) + 1000, nowMs: Date.parse(events.at(-1)!.ts) + 1000 };
    // Stopped first: its clean disconnect (an offline interval) is then part of both readings.
    await unit.agent.stop();
    const before = createHistoryReader(rig.store).device(DEVICE, window);
    const again = openStore(rig.store.dataDir);
    try {
      expect(createHistoryReader(again).device(DEVICE, window)).toEqual(before);
    } finally {
      again.close();
    }
    expect(before.filter((i) => i.kind === 'profile')).toHaveLength(events.length);
  });
});
