import { existsSync, mkdirSync, readdirSync, utimesSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { generateSigningKeyPair, signatureDigest, signKeyRotation, signRelease, type SignedRelease } from '../../src/protocol/index.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, keys, legacyRelease, sign, waitFor } from '../support/agent-fixtures.js';
import { agentSuite, type AgentFailure } from '../support/agent-suite.js';
import type { AgentConfig } from '../../device-agent/config.js';

const suite = agentSuite({ rows: 'rows-net v1', leaves: 'leaf-net v1' });
const { rows, leaves, tasks } = suite;
const rowsV2 = demoWeights('rows-net v2');
const newAgent = (label: string, failure?: AgentFailure, extra: Partial<AgentConfig> = {}) =>
  suite.newAgent(label, { ...(failure !== undefined ? { failure } : {}), extra });

async function assign(id: string, signed: SignedRelease | unknown) {
  await suite.bus.bridge.publishRelease(id, { raw: JSON.stringify(signed), parsed: signed as SignedRelease });
}

describe('agent and releases (embedded broker, real HTTP weights server)', () => {
  it('fetches the weights, verifies them, applies the release and reports it in state and events', async () => {
    const { id, rig } = await newAgent('apply');
    await assign(id, sign(demoRelease('rel-a1', 1, tasks)));
    await waitFor(() => suite.bus.bridge.deviceStates.get(id)?.releaseId === 'rel-a1', 'server sees rel-a1 in state');
    expect(suite.bus.bridge.deviceStates.get(id)).toMatchObject({ online: true, releaseId: 'rel-a1', releaseVersion: 1, activeTask: 'rows' });
    expect(rig.driver.hardware()).toMatchObject({ weightsSha256: rows.sha256, camera: { focusDistanceM: 0.5, fNumber: 4 } });
    expect(suite.web.requests.filter((r) => r.user === id).map((r) => r.path).sort()).toEqual(['/api/v1/models/leaf-net/weights', '/api/v1/models/rows-net/weights']);
    await waitFor(() => suite.storedTypes(id).includes('task-switched'), 'task-switched stored');
    expect(suite.storedTypes(id)).toEqual(['agent-started', 'release-applied', 'task-switched']);
    expect(suite.storedEvents(id, 'task-switched')[0]).toMatchObject({ toTask: 'rows', reason: 'release', releaseId: 'rel-a1' });
    // Switching to the other task needs nothing from the network.
    const r = await rig.agent.setTask('leaves');
    expect(r).toMatchObject({ ok: true, task: 'leaves' });
    expect(rig.driver.hardware()).toMatchObject({ weightsSha256: leaves.sha256, camera: { focusDistanceM: 0.25, fNumber: 2.8 } });
    await suite.bus.bridge.clearRelease(id);
  });

  it('switches task on an operator command (QoS 1, run once per command id) and reports telemetry', async () => {
    const { id, rig } = await newAgent('cmd', undefined, { telemetryIntervalS: 0.05 });
    await assign(id, sign(demoRelease('rel-c0', 1, tasks)));
    await waitFor(() => rig.agent.state().activeTask === 'rows', 'rows running');
    await suite.bus.bridge.publishCommand(id, { type: 'set-task', task: 'leaves' }, 'operator (test)');
    await waitFor(() => rig.agent.state().activeTask === 'leaves', 'switched by command');
    await waitFor(() => suite.storedEvents(id, 'task-switched').some((e) => e.reason === 'command'), 'command switch stored');
    expect(suite.storedEvents(id, 'task-switched').find((e) => e.reason === 'command')).toMatchObject({ fromTask: 'rows', toTask: 'leaves' });
    await suite.bus.bridge.publishCommand(id, { type: 'set-task', task: 'no-such-task' }, 'operator (test)');
    await waitFor(() => suite.storedEvents(id, 'switch-failed').length === 1, 'unknown task reported');
    expect(suite.storedEvents(id, 'switch-failed')[0]).toMatchObject({ toTask: 'no-such-task', step: 'select-task', restored: true });
    await waitFor(() => suite.storedEvents(id, 'telemetry').length > 0, 'telemetry stored');
    expect(suite.storedEvents(id, 'telemetry').at(-1)).toMatchObject({ task: 'leaves', profileId: 'leaf-net-profile', releaseId: 'rel-c0' });
    await suite.bus.bridge.clearRelease(id);
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
    await suite.bus.serverClient.publishAsync(`ocellus/v1/dev/${id}/release`, '{"release": {"id": "rel-t4"', { qos: 1, retain: true });
    await waitFor(() => rig.agent.state().refused?.reason.startsWith('malformed-json'), 'unreadable release refused');
    expect(rig.agent.state()).toMatchObject({ releaseId: 'rel-t1', activeTask: 'rows', refused: { releaseId: null } });
    await waitFor(() => suite.storedEvents(id, 'release-refused').length === 3, 'refusals reach the server');
    expect(suite.storedEvents(id, 'release-refused').map((e) => e.releaseId)).toEqual(['rel-t2', 'rel-t3', null]);
    await suite.bus.bridge.clearRelease(id);
  });

  it('reports weights that do not match their sha256, keeps the old profile, and fetches again instead of remembering a refusal', async () => {
    const { id, rig } = await newAgent('hash');
    await assign(id, sign(demoRelease('rel-h1', 1, tasks)));
    await waitFor(() => rig.agent.state().releaseId === 'rel-h1', 'rel-h1 applied');
    suite.web.files.set('/api/v1/models/rows-net-v2/weights', demoWeights('something else').bytes);
    const v2 = { ...tasks, rows: { ...demoTask('rows-net-v2', rowsV2, 0.6, 5.6) } };
    await assign(id, sign(demoRelease('rel-h2', 2, v2)));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-h2', 'bad weights reported');
    expect(rig.agent.state().refused?.reason).toContain(`the release says ${rowsV2.sha256}`);
    expect(rig.agent.state()).toMatchObject({ releaseId: 'rel-h1', activeTask: 'rows', pending: { releaseId: 'rel-h2' } });
    expect(rig.agent.state().pending?.reason).toMatch(/retrying in \d+ s/);
    expect(rig.driver.hardware().weightsSha256).toBe(rows.sha256);
    expect(existsSync(join(rig.dataDir, 'weights', rowsV2.sha256))).toBe(false);
    // The server gets the right file: the next try applies the release, without a restart or a new assignment.
    suite.web.files.set('/api/v1/models/rows-net-v2/weights', rowsV2.bytes);
    await waitFor(() => rig.agent.state().releaseId === 'rel-h2', 'rel-h2 applied on a later try', 20_000);
    expect(rig.agent.state().refused).toBeNull();
    expect(rig.driver.hardware().weightsSha256).toBe(rowsV2.sha256);
    await suite.bus.bridge.clearRelease(id);
  });

  it('fetches weights by hash, even for a release made before weights were named by hash, after the model got new weights', async () => {
    const { id, rig } = await newAgent('legacy');
    const old = demoWeights('legacy-net v1');
    // The model's latest weights are new ones; the old release still needs the old file, which the server keeps by hash.
    suite.web.files.set('/api/v1/models/legacy-net/weights', demoWeights('legacy-net v2').bytes);
    suite.web.bySha.set(old.sha256, old.bytes);
    const legacy = legacyRelease('rel-l1', 1, { rows: demoTask('legacy-net', old, 0.5, 4) });
    expect(legacy.tasks.rows!.model.weightsPath).toBe('/api/v1/models/legacy-net/weights');
    await assign(id, sign(legacy));
    await waitFor(() => rig.agent.state().releaseId === 'rel-l1', 'legacy release applied');
    expect(rig.driver.hardware().weightsSha256).toBe(old.sha256);
    expect(suite.web.requests.filter((r) => r.user === id).map((r) => r.sha256)).toEqual([old.sha256]);
    await suite.bus.bridge.clearRelease(id);
  });

  it('refuses a replayed older release with its reason, also after a restart, and takes old content back only as a re-issue with a higher sequence', async () => {
    const { id, rig } = await newAgent('replay');
    const v1 = sign(demoRelease('rel-p1', 1, tasks));
    await assign(id, sign(demoRelease('rel-p2', 2, { rows: tasks.leaves, leaves: tasks.rows })));
    await waitFor(() => rig.agent.state().releaseId === 'rel-p2', 'v2 applied');
    await assign(id, v1);
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-p1', 'replayed v1 refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^older-sequence: .*sequence 1, below the 2/);
    expect(rig.agent.state()).toMatchObject({ releaseId: 'rel-p2', pending: null });
    await waitFor(() => suite.storedEvents(id, 'release-refused').some((e) => e.releaseId === 'rel-p1'), 'refusal stored');
    expect(suite.storedEvents(id, 'release-refused').find((e) => e.releaseId === 'rel-p1').reason).toMatch(/^older-sequence/);
    // The highest sequence survives a restart of the agent.
    await rig.agent.stop();
    const again = await suite.startAgent({ ...rig.config });
    await waitFor(() => again.agent.state().refused?.releaseId === 'rel-p1', 'v1 refused after the restart too');
    expect(again.agent.state().releaseId).toBe('rel-p2');
    await assign(id, sign(demoRelease('rel-p3', 3, tasks, { reissueOf: { releaseId: 'rel-p1', version: 1 } })));
    await waitFor(() => again.agent.state().releaseId === 'rel-p3', 're-issue of v1 applied');
    expect(again.driver.hardware()).toMatchObject({ weightsSha256: rows.sha256, camera: { focusDistanceM: 0.5 } });
    await suite.bus.bridge.clearRelease(id);
  });

  it('tells releases apart by signature digest: a redelivery changes nothing, a reused sequence with other content is refused', async () => {
    const { id, rig } = await newAgent('digest');
    const first = sign(demoRelease('rel-g2', 2, tasks));
    await assign(id, first);
    await waitFor(() => rig.agent.state().releaseId === 'rel-g2', 'rel-g2 applied');
    expect(rig.agent.state().releaseDigest).toBe(signatureDigest(first.signature));
    await waitFor(() => (suite.bus.bridge.deviceStates.get(id)?.state as { releaseDigest?: string } | undefined)?.releaseDigest === signatureDigest(first.signature), 'digest in the state the server holds');
    await assign(id, JSON.parse(JSON.stringify(first)));
    const changed = demoRelease('rel-g2', 2, { ...tasks, rows: demoTask('rows-net', rows, 0.9, 8) });
    await assign(id, sign(changed));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-g2', 'same id, other content refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^sequence-reused/);
    expect(rig.driver.hardware().camera).toMatchObject({ focusDistanceM: 0.5, fNumber: 4 });
    await waitFor(() => suite.storedEvents(id, 'release-refused').length === 1, 'refusal stored');
    expect(suite.storedEvents(id, 'release-applied')).toHaveLength(1);
    await suite.bus.bridge.clearRelease(id);
  });

  it('refuses an expired release and one whose signed audience lists other devices', async () => {
    const { id, rig } = await newAgent('audience');
    await assign(id, sign(demoRelease('rel-e1', 1, tasks, { expiresAt: '2020-01-01T00:00:00.000Z' })));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-e1', 'expired release refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^expired: release expired at 2020-01-01/);
    await assign(id, sign(demoRelease('rel-e2', 2, tasks, { audience: { deviceClassId: demoDeviceClass.id, deviceIds: ['gh-somebody-else'] } })));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-e2', 'release for other devices refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^not-in-audience/);
    expect(rig.agent.state().releaseId).toBeNull();
    await assign(id, sign(demoRelease('rel-e3', 3, tasks, { audience: { deviceClassId: demoDeviceClass.id, deviceIds: ['gh-somebody-else', id] } })));
    await waitFor(() => rig.agent.state().releaseId === 'rel-e3', 'release listing this device applied');
    await suite.bus.bridge.clearRelease(id);
  });

  it('follows a key rotation signed by the trusted key, then refuses the replaced key and a chain link the old key did not sign', async () => {
    const { id, rig } = await newAgent('rotate');
    const next = generateSigningKeyPair();
    const link = signKeyRotation(keys, next.publicKeyPem, '2025-06-01T00:00:00.000Z');
    await assign(id, signRelease(demoRelease('rel-k2', 2, tasks), next.privateKeyPem, next.publicKeyPem, [link]));
    await waitFor(() => rig.agent.state().releaseId === 'rel-k2', 'release by the rotated key applied');
    await waitFor(() => existsSync(join(rig.dataDir, 'trusted-keys.json')), 'new key kept');
    // The replaced key no longer counts, even for a higher sequence.
    await assign(id, sign(demoRelease('rel-k3', 3, tasks)));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-k3', 'release by the replaced key refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^unknown-key: .*replaced/);
    // A third key vouched for by a stranger instead of the current key.
    const stranger = generateSigningKeyPair();
    const third = generateSigningKeyPair();
    const forged = signKeyRotation(stranger, third.publicKeyPem, '2025-07-01T00:00:00.000Z');
    const badLink = { ...forged, statement: { ...forged.statement, previousKeyId: link.statement.keyId } };
    await assign(id, signRelease(demoRelease('rel-k4', 4, tasks), third.privateKeyPem, third.publicKeyPem, [link, badLink]));
    await waitFor(() => rig.agent.state().refused?.releaseId === 'rel-k4', 'forged chain refused');
    expect(rig.agent.state().refused?.reason).toMatch(/^unknown-key: .*not signed by the previous key/);
    expect(rig.agent.state().releaseId).toBe('rel-k2');
    await suite.bus.bridge.clearRelease(id);
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
    await waitFor(() => suite.storedEvents(id, 'switch-failed').length === 1, 'switch-failed stored');
    expect(suite.storedEvents(id, 'switch-failed')[0]).toMatchObject({ toTask: 'leaves', step: 'loadWeights', restored: true });
    await suite.bus.bridge.clearRelease(id);
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
    await waitFor(() => suite.storedTypes(id).includes('release-applied') && suite.storedTypes(id).filter((t) => t === 'release-applied').length === 2, 'events stored');
    const types = suite.storedTypes(id);
    expect(types.indexOf('release-deferred')).toBeLessThan(types.lastIndexOf('release-applied'));
    await suite.bus.bridge.clearRelease(id);
  });

  it('resumes a partial weights file with a Range request from its size (RFC 9110 §14.2)', async () => {
    const { id, rig } = await newAgent('resume');
    const big = demoWeights('resume-net', 256 * 1024);
    suite.web.files.set('/api/v1/models/resume-net/weights', big.bytes);
    mkdirSync(join(rig.dataDir, 'weights'), { recursive: true });
    writeFileSync(join(rig.dataDir, 'weights', `${big.sha256}.part`), big.bytes.subarray(0, 100_000));
    await assign(id, sign(demoRelease('rel-d1', 1, { rows: demoTask('resume-net', big, 0.5, 4) })));
    await waitFor(() => rig.agent.state().releaseId === 'rel-d1', 'applied after resuming');
    expect(suite.web.requests.filter((r) => r.user === id).map((r) => r.range)).toEqual(['bytes=100000-']);
    expect(existsSync(join(rig.dataDir, 'weights', big.sha256))).toBe(true);
    await suite.bus.bridge.clearRelease(id);
  });

  it('finishes a download the server cut off, and verifies the whole file', async () => {
    const { id, rig } = await newAgent('cut');
    const big = demoWeights('cut-net', 256 * 1024);
    suite.web.files.set('/api/v1/models/cut-net/weights', big.bytes);
    suite.web.cutOnce.set('/api/v1/models/cut-net/weights', 100_000);
    await assign(id, sign(demoRelease('rel-k1', 1, { rows: demoTask('cut-net', big, 0.5, 4) })));
    await waitFor(() => rig.agent.state().releaseId === 'rel-k1', 'applied after the cut', 20_000);
    expect(suite.web.requests.filter((r) => r.user === id).length).toBeGreaterThanOrEqual(2);
    expect(rig.driver.hardware().weightsSha256).toBe(big.sha256);
    await suite.bus.bridge.clearRelease(id);
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
    await suite.bus.bridge.clearRelease(id);
  });
});
