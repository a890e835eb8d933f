import { existsSync, mkdirSync, readdirSync, utimesSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { generateSigningKeyPair, signRelease, type SignedRelease } from '../../src/protocol/index.js';
import { demoRelease, demoTask, demoWeights, sign, tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { agentConfig, startAgent, startBusRig, startWeightsServer, type AgentRig, type BusRig, type WeightsServer } from '../support/agent-rig.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

const rows = demoWeights('rows-net v1');
const leaves = demoWeights('leaf-net v1');
const rowsV2 = demoWeights('rows-net v2');
const tasks = { rows: demoTask('rows-net', rows, 0.5, 4), leaves: demoTask('leaf-net', leaves, 0.25, 2.8) };

let bus: BusRig;
let web: WeightsServer;
const dirs: Array<{ remove(): void }> = [];
const agents: AgentRig[] = [];

beforeAll(async () => {
  bus = await startBusRig();
  web = await startWeightsServer();
  web.files.set('/api/v1/models/rows-net/weights', rows.bytes);
  web.files.set('/api/v1/models/leaf-net/weights', leaves.bytes);
});
afterAll(async () => {
  for (const a of agents) await a.agent.stop();
  await web.close();
  await bus.close();
  for (const d of dirs) d.remove();
});

async function newAgent(label: string, failure?: Parameters<typeof startAgent>[1], extra = {}) {
  const id = uniqueDeviceId(label);
  const dir = tempDir(label);
  dirs.push(dir);
  const rig = await startAgent(agentConfig(id, bus.enrol(id), bus.brokerUrl, web.url, dir.path, extra), failure);
  agents.push(rig);
  await waitFor(() => rig.agent.connected(), 'agent connected');
  return { id, rig };
}

const storedTypes = (id: string) => sqliteHandle(bus.store).prepare('SELECT type FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all(id) as string[];
const storedEvents = (id: string, type: string) =>
  (sqliteHandle(bus.store).prepare('SELECT event FROM device_events WHERE device_id = ? AND type = ? ORDER BY seq').pluck().all(id, type) as string[]).map((e) => JSON.parse(e));

async function assign(id: string, signed: SignedRelease | unknown) {
  await bus.bridge.publishRelease(id, { raw: JSON.stringify(signed), parsed: signed as SignedRelease });
}

describe('agent and releases (embedded broker, real HTTP weights server)', () => {
  it('fetches the weights, verifies them, applies the release and reports it in state and events', async () => {
    const { id, rig } = await newAgent('apply');
    await assign(id, sign(demoRelease('rel-a1', 1, tasks)));
    await waitFor(() => bus.bridge.deviceStates.get(id)?.releaseId === 'rel-a1', 'server sees rel-a1 in state');
    expect(bus.bridge.deviceStates.get(id)).toMatchObject({ online: true, releaseId: 'rel-a1', releaseVersion: 1, activeTask: 'rows' });
    expect(rig.driver.hardware()).toMatchObject({ weightsSha256: rows.sha256, camera: { focusDistanceM: 0.5, fNumber: 4 } });
    expect(web.requests.filter((r) => r.user === id).map((r) => r.path).sort()).toEqual(['/api/v1/models/leaf-net/weights', '/api/v1/models/rows-net/weights']);
    await waitFor(() => storedTypes(id).includes('task-switched'), 'task-switched stored');
    expect(storedTypes(id)).toEqual(['agent-started', 'release-applied', 'task-switched']);
    expect(storedEvents(id, 'task-switched')[0]).toMatchObject({ toTask: 'rows', reason: 'release', releaseId: 'rel-a1' });
    // Switching to the other task needs nothing from the network.
    const r = await rig.agent.setTask('leaves');
    expect(r).toMatchObject({ ok: true, task: 'leaves' });
    expect(rig.driver.hardware()).toMatchObject({ weightsSha256: leaves.sha256, camera: { focusDistanceM: 0.25, fNumber: 2.8 } });
    await bus.bridge.clearRelease(id);
  });

  it('switches task on an operator command (QoS 1, run once per command id) and reports telemetry', async () => {
    const { id, rig } = await newAgent('cmd', undefined, { telemetryIntervalS: 0.05 });
    await assign(id, sign(demoRelease('rel-c0', 1, tasks)));
    await waitFor(() => rig.agent.state().activeTask === 'rows', 'rows running');
    await bus.bridge.publishCommand(id, { type: 'set-task', task: 'leaves' }, 'operator (test)');
    await waitFor(() => rig.agent.state().activeTask === 'leaves', 'switched by command');
    await waitFor(() => storedEvents(id, 'task-switched').some((e) => e.reason === 'command'), 'command switch stored');
    expect(storedEvents(id, 'task-switched').find((e) => e.reason === 'command')).toMatchObject({ fromTask: 'rows', toTask: 'leaves' });
    await bus.bridge.publishCommand(id, { type: 'set-task', task: 'no-such-task' }, 'operator (test)');
    await waitFor(() => storedEvents(id, 'switch-failed').length === 1, 'unknown task reported');
    expect(storedEvents(id, 'switch-failed')[0]).toMatchObject({ toTask: 'no-such-task', step: 'select-task', restored: true });
    await waitFor(() => storedEvents(id, 'telemetry').length > 0, 'telemetry stored');
    expect(storedEvents(id, 'telemetry').at(-1)).toMatchObject({ task: 'leaves', profileId: 'leaf-net-profile', releaseId: 'rel-c0' });
    await bus.bridge.clearRelease(id);
  });

  it('refuses a tampered and a forged release with the reason, and keeps running the old one', async () => {
    const { id, rig } = await newAgent('tamper');
    await assign(id, sign(demoRelease('rel-t1', 1, tasks)));
    await waitFor(() => rig.agent.state().releaseId === 'rel-t1', 'rel-t1 applied');
    const tampered = JSON.parse(JSON.stringify(sign(demoRelease('rel-t2', 2, tasks))));
    tampered.release.tasks.rows.camera.analogGain = 16;
    await assign(id, tampered);
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-t2', 'tampered release refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^bad-signature/);
    const stranger = generateSigningKeyPair();
    await assign(id, signRelease(demoRelease('rel-t3', 3, tasks), stranger.privateKeyPem, stranger.publicKeyPem));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-t3', 'forged release refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^unknown-key/);
    await bus.serverClient.publishAsync(`ocellus/v1/dev/${id}/release`, '{"release": {"id": "rel-t4"', { qos: 1, retain: true });
    await waitFor(() => rig.agent.state().refused?.reason.startsWith('malformed-json'), 'unreadable release refused');
    expect(rig.agent.state()).toMatchObject({ releaseId: 'rel-t1', activeTask: 'rows', refused: { releaseId: null } });
    await waitFor(() => storedEvents(id, 'release-refused').length === 3, 'refusals reach the server');
    expect(storedEvents(id, 'release-refused').map((e) => e.releaseId)).toEqual(['rel-t2', 'rel-t3', null]);
    await bus.bridge.clearRelease(id);
  });

  it('refuses a release whose weights do not match their sha256 and keeps the old profile', async () => {
    const { id, rig } = await newAgent('hash');
    await assign(id, sign(demoRelease('rel-h1', 1, tasks)));
    await waitFor(() => rig.agent.state().releaseId === 'rel-h1', 'rel-h1 applied');
    web.files.set('/api/v1/models/rows-net-v2/weights', demoWeights('something else').bytes);
    const v2 = { ...tasks, rows: { ...demoTask('rows-net-v2', rowsV2, 0.6, 5.6) } };
    await assign(id, sign(demoRelease('rel-h2', 2, v2)));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-h2', 'bad weights refused');
    expect(rig.agent.state().refused?.reason).toContain(`the release says ${rowsV2.sha256}`);
    expect(rig.agent.state()).toMatchObject({ releaseId: 'rel-h1', activeTask: 'rows', pending: null });
    expect(rig.driver.hardware().weightsSha256).toBe(rows.sha256);
    expect(existsSync(join(rig.dataDir, 'weights', rowsV2.sha256))).toBe(false);
    await bus.bridge.clearRelease(id);
  });

  it('restores the previous settings when a driver step fails, and reports switch-failed with restored: true', async () => {
    const { id, rig } = await newAgent('fail', { step: 'loadWeights', task: 'leaves' });
    await assign(id, sign(demoRelease('rel-f1', 1, tasks)));
    await waitFor(() => rig.agent.state().activeTask === 'rows', 'rows running');
    const before = rig.driver.hardware();
    const r = await rig.agent.setTask('leaves');
    expect(r).toMatchObject({ ok: false, code: 'switch-failed', step: 'loadWeights', restored: true });
    expect(rig.driver.hardware()).toEqual(before);
    expect(rig.agent.state().activeTask).toBe('rows');
    await waitFor(() => storedEvents(id, 'switch-failed').length === 1, 'switch-failed stored');
    expect(storedEvents(id, 'switch-failed')[0]).toMatchObject({ toTask: 'leaves', step: 'loadWeights', restored: true });
    await bus.bridge.clearRelease(id);
  });

  it('defers a when-idle release while the robot moves and applies it when it stops', async () => {
    const { id, rig } = await newAgent('idle');
    await assign(id, sign(demoRelease('rel-i1', 1, tasks)));
    await waitFor(() => rig.agent.state().releaseId === 'rel-i1', 'rel-i1 applied');
    rig.agent.setMotion(true);
    await assign(id, sign(demoRelease('rel-i2', 2, tasks, { applyPolicy: 'when-idle' })));
    await waitFor(() => rig.agent.state().pending?.reason.includes('stop moving'), 'release deferred');
    expect(rig.agent.state()).toMatchObject({ releaseId: 'rel-i1', moving: true, pending: { releaseId: 'rel-i2', version: 2 } });
    rig.agent.setMotion(false);
    await waitFor(() => rig.agent.state().releaseId === 'rel-i2', 'applied after stopping');
    expect(rig.agent.state().pending).toBeNull();
    await waitFor(() => storedTypes(id).includes('release-applied') && storedTypes(id).filter((t) => t === 'release-applied').length === 2, 'events stored');
    const types = storedTypes(id);
    expect(types.indexOf('release-deferred')).toBeLessThan(types.lastIndexOf('release-applied'));
    await bus.bridge.clearRelease(id);
  });

  it('takes an older release as a rollback: re-assigning version 1 after version 2 applies it', async () => {
    const { id, rig } = await newAgent('rollback');
    await assign(id, sign(demoRelease('rel-r2', 2, tasks)));
    await waitFor(() => rig.agent.state().releaseId === 'rel-r2', 'v2 applied');
    await assign(id, sign(demoRelease('rel-r1', 1, tasks)));
    await waitFor(() => rig.agent.state().releaseId === 'rel-r1', 'v1 applied again');
    expect(rig.agent.state().refused).toBeNull();
    await bus.bridge.clearRelease(id);
  });

  it('resumes a partial weights file with a Range request from its size (RFC 9110 §14.2)', async () => {
    const { id, rig } = await newAgent('resume');
    const big = demoWeights('resume-net', 256 * 1024);
    web.files.set('/api/v1/models/resume-net/weights', big.bytes);
    mkdirSync(join(rig.dataDir, 'weights'), { recursive: true });
    writeFileSync(join(rig.dataDir, 'weights', `${big.sha256}.part`), big.bytes.subarray(0, 100_000));
    await assign(id, sign(demoRelease('rel-d1', 1, { rows: demoTask('resume-net', big, 0.5, 4) })));
    await waitFor(() => rig.agent.state().releaseId === 'rel-d1', 'applied after resuming');
    expect(web.requests.filter((r) => r.user === id).map((r) => r.range)).toEqual(['bytes=100000-']);
    expect(existsSync(join(rig.dataDir, 'weights', big.sha256))).toBe(true);
    await bus.bridge.clearRelease(id);
  });

  it('finishes a download the server cut off, and verifies the whole file', async () => {
    const { id, rig } = await newAgent('cut');
    const big = demoWeights('cut-net', 256 * 1024);
    web.files.set('/api/v1/models/cut-net/weights', big.bytes);
    web.cutOnce.set('/api/v1/models/cut-net/weights', 100_000);
    await assign(id, sign(demoRelease('rel-k1', 1, { rows: demoTask('cut-net', big, 0.5, 4) })));
    await waitFor(() => rig.agent.state().releaseId === 'rel-k1', 'applied after the cut', 20_000);
    expect(web.requests.filter((r) => r.user === id).length).toBeGreaterThanOrEqual(2);
    expect(rig.driver.hardware().weightsSha256).toBe(big.sha256);
    await bus.bridge.clearRelease(id);
  });

  it('keeps the weights cache under its cap by removing the least recently used file, never one the release needs', async () => {
    const { id, rig } = await newAgent('cache', undefined, { cacheMaxBytes: 3 * 64 * 1024 });
    const dir = join(rig.dataDir, 'weights');
    const stale = demoWeights('stale-net');
    const recent = demoWeights('recent-net');
    writeFileSync(join(dir, stale.sha256), stale.bytes);
    writeFileSync(join(dir, recent.sha256), recent.bytes);
    utimesSync(join(dir, stale.sha256), new Date(Date.now() - 7200_000), new Date(Date.now() - 7200_000));
    utimesSync(join(dir, recent.sha256), new Date(Date.now() - 3600_000), new Date(Date.now() - 3600_000));
    await assign(id, sign(demoRelease('rel-c1', 1, tasks)));
    await waitFor(() => rig.agent.state().releaseId === 'rel-c1', 'applied');
    const weightsFiles = () => readdirSync(dir).filter((n) => /^[0-9a-f]{64}$/.test(n));
    await waitFor(() => weightsFiles().length === 3, 'cache trimmed to its cap');
    const left = weightsFiles();
    expect(left).toEqual(expect.arrayContaining([rows.sha256, leaves.sha256, recent.sha256]));
    await bus.bridge.clearRelease(id);
  });
});
