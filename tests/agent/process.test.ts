import { signedReleaseText } from '../../src/protocol/release.js';
import { describe, expect, it } from 'vitest';
import { demoRelease, sign, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { agentConfig, writeProcessConfig } from '../support/agent-rig.js';
import { agentSuite } from '../support/agent-suite.js';
import { runAgentCommand, spawnAgent, type AgentProcess } from '../support/agent-process-rig.js';
import { callControl } from '../../device-agent/control-client.js';
import type { ControlEndpoint } from '../../device-agent/control-server.js';
import { readFileSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

const suite = agentSuite({ rows: 'rows-net p', leaves: 'leaf-net p' });
const { tasks } = suite;

function setUp(label: string) {
  const id = uniqueDeviceId(label);
  const dir = suite.dir(label);
  const config = agentConfig(id, suite.bus.enrol(id), suite.bus.brokerUrl, suite.web.url, join(dir.path, 'data'));
  const configPath = writeProcessConfig(dir.path, config);
  const procs: AgentProcess[] = [];
  suite.onCleanup(async () => {
    for (const p of procs) await p.kill();
  });
  return {
    id,
    dataDir: config.dataDir,
    start: async () => {
      const p = spawnAgent(['--config', configPath]);
      procs.push(p);
      await p.waitForOutput(/agent: connected to/, 'agent connected');
      await p.waitForOutput(/agent: control endpoint/, 'control endpoint open');
      return p;
    },
    endpoint: () => JSON.parse(readFileSync(join(config.dataDir, 'control.json'), 'utf8')) as ControlEndpoint,
  };
}

describe('agent as a process (embedded broker)', () => {
  it('switches task with the broker gone, then delivers the events once the broker is back', async () => {
    const s = setUp('offline');
    await s.start();
    await suite.bus.bridge.publishRelease(s.id, signedReleaseText(sign(demoRelease('rel-p1', 1, tasks))));
    await waitFor(() => suite.bus.bridge.deviceStates.get(s.id)?.activeTask === 'rows', 'rows applied');
    await suite.bus.stopBroker();
    const r = await runAgentCommand(['task', 'leaves', '--data-dir', s.dataDir, '--json']);
    expect(r.code).toBe(0);
    expect(JSON.parse(r.stdout)).toMatchObject({ ok: true, task: 'leaves' });
    const state = await callControl(s.endpoint(), 'GET', '/state');
    expect(state.body).toMatchObject({ online: false, activeTask: 'leaves', releaseId: 'rel-p1' });
    await suite.bus.startBroker();
    await waitFor(() => suite.storedEvents(s.id).some((e) => e.type === 'task-switched' && e.toTask === 'leaves'), 'the offline switch reaches the server');
    const switched = suite.storedEvents(s.id).find((e) => e.type === 'task-switched' && e.toTask === 'leaves')!;
    expect(switched).toMatchObject({ fromTask: 'rows', reason: 'local', releaseId: 'rel-p1' });
    await waitFor(() => suite.bus.bridge.deviceStates.get(s.id)?.activeTask === 'leaves', 'state after reconnect');
  });

  it('converges on a release assigned while it was off, after re-applying its last task on restart', async () => {
    const s = setUp('restart');
    const first = await s.start();
    await suite.bus.bridge.publishRelease(s.id, signedReleaseText(sign(demoRelease('rel-q1', 1, tasks))));
    await waitFor(() => suite.bus.bridge.deviceStates.get(s.id)?.activeTask === 'rows', 'rows applied');
    const text = await runAgentCommand(['task', 'leaves', '--data-dir', s.dataDir]);
    expect(text.code).toBe(0);
    // Without --json: a line for people.
    expect(text.stdout).toMatch(/^switched to task leaves \(actuation [\d.]+ ms\)\n$/);
    await waitFor(() => suite.storedEvents(s.id).some((e) => e.type === 'task-switched' && e.toTask === 'leaves'), 'switch stored');
    await first.kill();
    await suite.bus.bridge.publishRelease(s.id, signedReleaseText(sign(demoRelease('rel-q2', 2, tasks))));
    await s.start();
    await waitFor(() => suite.bus.bridge.deviceStates.get(s.id)?.releaseId === 'rel-q2', 'rel-q2 applied after restart');
    const all = suite.storedEvents(s.id);
    const afterRestart = all.slice(all.map((e) => e.type).lastIndexOf('agent-started'));
    expect(afterRestart.map((e) => e.type)).toEqual(['agent-started', 'task-switched', 'release-applied', 'task-switched']);
    expect(afterRestart[1]).toMatchObject({ reason: 'startup', toTask: 'leaves', releaseId: 'rel-q1', fromTask: null });
    expect(afterRestart[3]).toMatchObject({ reason: 'release', toTask: 'leaves', releaseId: 'rel-q2' });
    expect(suite.bus.bridge.deviceStates.get(s.id)).toMatchObject({ online: true, activeTask: 'leaves' });
  });

  it('loses no event and stores none twice when the broker restarts mid-stream', async () => {
    const s = setUp('stream');
    await s.start();
    await suite.bus.bridge.publishRelease(s.id, signedReleaseText(sign(demoRelease('rel-s1', 1, tasks))));
    await waitFor(() => suite.bus.bridge.deviceStates.get(s.id)?.activeTask === 'rows', 'rows applied');
    let moving = false;
    for (let round = 0; round < 3; round++) {
      for (let i = 0; i < 150; i++) {
        moving = !moving;
        await callControl(s.endpoint(), 'POST', '/motion', { moving });
      }
      await suite.bus.restartBroker();
    }
    const state = (await callControl(s.endpoint(), 'GET', '/state')).body as { lastSeq: number };
    expect(state.lastSeq).toBeGreaterThanOrEqual(450);
    await waitFor(() => sqliteHandle(suite.bus.store).prepare('SELECT contiguous_seq FROM device_event_cursor WHERE device_id = ?').pluck().get(s.id) === state.lastSeq, 'every event acked', 30_000);
    const seqs = sqliteHandle(suite.bus.store).prepare('SELECT seq FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all(s.id) as number[];
    expect(seqs).toEqual(Array.from({ length: state.lastSeq }, (_v, i) => i + 1));
    expect(suite.storedEvents(s.id).filter((e) => e.type === 'motion')).toHaveLength(450);
  });

  it('keeps the events of an agent whose data folder was wiped, under a new event-log epoch', async () => {
    const s = setUp('wiped');
    const cursor = () => sqliteHandle(suite.bus.store).prepare('SELECT contiguous_seq FROM device_event_cursor WHERE device_id = ?').pluck().get(s.id) as number | undefined;
    const first = await s.start();
    await suite.bus.bridge.publishRelease(s.id, signedReleaseText(sign(demoRelease('rel-w1', 1, tasks))));
    await waitFor(() => suite.bus.bridge.deviceStates.get(s.id)?.activeTask === 'rows', 'rows applied');
    const before = (await callControl(s.endpoint(), 'GET', '/state')).body as { lastSeq: number };
    await waitFor(() => cursor() === before.lastSeq, 'the first log acked');
    expect(await first.stop()).toBe(0);
    rmSync(s.dataDir, { recursive: true, force: true });
    // The wiped agent numbers from 1 again; the retained release is applied anew.
    const second = await s.start();
    await waitFor(() => suite.storedEvents(s.id).filter((e) => e.type === 'agent-started').length === 2, 'the new log’s first event stored');
    await waitFor(() => suite.storedEvents(s.id).filter((e) => e.type === 'release-applied').length === 2, 'the re-applied release stored');
    const after = (await callControl(s.endpoint(), 'GET', '/state')).body as { lastSeq: number };
    await waitFor(() => cursor() === before.lastSeq + after.lastSeq, 'the new log acked');
    const all = suite.storedEvents(s.id);
    expect(all).toHaveLength(before.lastSeq + after.lastSeq);
    // Each log's own numbering is kept in its events: 1.. in the first, 1.. again in the second.
    expect(all.map((e) => e.seq)).toEqual([...Array.from({ length: before.lastSeq }, (_v, i) => i + 1), ...Array.from({ length: after.lastSeq }, (_v, i) => i + 1)]);
    expect(suite.bus.store.deviceEventEpochs.list(s.id).map((e) => e.baseSeq)).toEqual([0, before.lastSeq]);
    expect(suite.bus.store.deviceConnections.latest(s.id, 20).filter((c) => c.cause === 'event-log-restarted')).toHaveLength(1);
    // The agent took the server's acks (they carry its epoch): on a clean stop its mark covers every event.
    expect(await second.stop()).toBe(0);
    const epochFile = JSON.parse(readFileSync(join(s.dataDir, 'events-epoch.json'), 'utf8')) as { epoch: string };
    expect(epochFile.epoch).toBe(suite.bus.store.deviceEventEpochs.list(s.id)[1]!.epoch);
    expect(JSON.parse(readFileSync(join(s.dataDir, 'events-acked.json'), 'utf8'))).toEqual({ ackedUpTo: after.lastSeq });
  });
});
