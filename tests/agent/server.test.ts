import { createHash } from 'node:crypto';
import { existsSync, writeFileSync } from 'node:fs';
import type { SignedRelease } from '../../src/protocol/release.js';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { busForServer } from '../../src/bus/start-bus.js';
import { createApiClient, type ApiClient } from '../../src/api-client/api-client.js';
import { createClassRelease, loadScenario } from '../../src/demo/load-scenario.js';
import { DEMO_CATALOG_DIR, DEMO_CLASSES } from '../../src/demo/scenario.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';
import { releaseWeights } from '../../device-agent/weights-cache.js';
import { tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { spawnAgent, type AgentProcess } from '../support/agent-process-rig.js';

// The whole path with the real server: weights pushed through the API, a release signed by the server,
// assigned through the API, fetched by an agent process over HTTP Basic with Range support (demo data).
describe('agent process against the real server (HTTP API, signed release, embedded broker)', () => {
  const dir = tempDir('agent-server');
  let server: RunningServer;
  let api: ApiClient;
  const procs: AgentProcess[] = [];
  const adminToken = 'agent-server-test-admin-token-0123456789';

  beforeAll(async () => {
    server = await startServer({ dataDir: join(dir.path, 'server'), port: 0, adminToken, log: () => {}, bus: busForServer({ embedded: { port: 0 } }) });
    api = createApiClient(server.url, adminToken);
    await loadScenario(api, DEMO_CATALOG_DIR);
  });
  afterAll(async () => {
    for (const p of procs) await p.kill();
    await server?.close();
    dir.remove();
  });

  it('applies a server-signed release with weights downloaded from the server', async () => {
    const demoClass = DEMO_CLASSES[0]!;
    const signed = await createClassRelease(api, demoClass);
    const { publicKeyPem } = await api.json<{ publicKeyPem: string }>('GET', '/api/v1/signing-key');
    const id = uniqueDeviceId('srv');
    const enrolled = await api.json<{ mqtt: { password: string } }>('POST', '/api/v1/devices', { id, deviceClassId: demoClass.deviceClassId, tags: ['test'] });
    const brokerUrl = /mqtt:\/\/[^\s]+/.exec(server.bus ?? '')![0];
    const keyPath = join(dir.path, 'server.pem');
    writeFileSync(keyPath, publicKeyPem);
    const dataDir = join(dir.path, 'agent');
    const agent = spawnAgent([
      '--device-id', id, '--device-class-id', demoClass.deviceClassId, '--broker-url', brokerUrl, '--password', enrolled.mqtt.password,
      '--server-url', server.url, '--public-key-path', keyPath, '--data-dir', dataDir, '--control-port', '0', '--sim-time-scale', '0',
    ]);
    procs.push(agent);
    await agent.waitForOutput(/agent: connected to/, 'agent connected');
    await api.json('POST', `/api/v1/devices/${id}/assign`, { releaseId: signed.release.id });
    const states = server.store.deviceStates;
    await waitFor(() => states.get(id)?.releaseId === signed.release.id, 'the release applied on the device', 30_000);
    expect(states.get(id)).toMatchObject({ online: true, activeTask: signed.release.defaultTask });
    for (const model of releaseWeights(signed.release)) expect(existsSync(join(dataDir, 'weights', model.sha256))).toBe(true);
  });

  it('installs an OLDER release on a fresh device after an engineer uploaded new weights for its model (weights named by hash)', async () => {
    const demoClass = DEMO_CLASSES[0]!;
    const older = (await api.json<Array<{ id: string; deviceClassId: string }>>('GET', `/api/v1/releases?deviceClass=${demoClass.deviceClassId}`))[0]!;
    const signedOlder = await api.json<SignedRelease>('GET', `/api/v1/releases/${older.id}`);
    const oldModel = Object.values(signedOlder.release.tasks)[0]!.model;
    // New weights for that model: a new model version with another sha256, uploaded (demo bytes).
    const fresh = Buffer.alloc(oldModel.sizeBytes);
    for (let i = 0; i < fresh.length; i += 32) createHash('sha256').update(`new weights of ${oldModel.id}:${i}`).digest().copy(fresh, i);
    const freshSha = createHash('sha256').update(fresh).digest('hex');
    const doc = await api.json<{ document: Record<string, unknown> }>('GET', `/api/v1/models/${oldModel.id}`);
    await api.json('PUT', `/api/v1/models/${oldModel.id}`, { ...doc.document, version: `${String(doc.document.version)}-retrained`, sha256: freshSha, sizeBytes: fresh.length });
    const up = await api.raw('PUT', `/api/v1/models/${oldModel.id}/weights`, { body: fresh, headers: { 'content-type': 'application/octet-stream' } });
    expect(up.status).toBe(201);
    // A robot that has never seen the old file, with its password in a 0600 file (never on the command line).
    const id = uniqueDeviceId('fresh');
    const enrolled = await api.json<{ mqtt: { password: string } }>('POST', '/api/v1/devices', { id, deviceClassId: demoClass.deviceClassId, tags: ['test'] });
    const passwordPath = join(dir.path, `${id}.password`);
    writeFileSync(passwordPath, `${enrolled.mqtt.password}\n`, { mode: 0o600 });
    const dataDir = join(dir.path, `agent-${id}`);
    const agent = spawnAgent([
      '--device-id', id, '--device-class-id', demoClass.deviceClassId, '--broker-url', /mqtt:\/\/[^\s]+/.exec(server.bus ?? '')![0], '--password-file', passwordPath,
      '--server-url', server.url, '--public-key-path', join(dir.path, 'server.pem'), '--data-dir', dataDir, '--control-port', '0', '--sim-time-scale', '0',
    ]);
    procs.push(agent);
    await agent.waitForOutput(/agent: connected to/, 'fresh agent connected');
    await api.json('POST', `/api/v1/devices/${id}/assign`, { releaseId: older.id });
    await waitFor(() => server.store.deviceStates.get(id)?.releaseId === older.id, 'the older release applied on the fresh device', 30_000);
    expect(existsSync(join(dataDir, 'weights', oldModel.sha256))).toBe(true);
    expect(existsSync(join(dataDir, 'weights', freshSha))).toBe(false);
    expect((server.store.deviceStates.get(id)?.state as { refused: unknown }).refused).toBeNull();
  });
});
