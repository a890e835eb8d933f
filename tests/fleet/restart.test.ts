/**
 * The server as a real process (`ocellus serve` with the embedded broker), killed with SIGKILL in the middle of
 * a rollout and started again on the same data folder and ports: the rollout continues from the database and
 * no device is assigned twice. Agents are in-process (the agent's factory, simulated driver), demo data.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { createServer } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createAgent, type Agent } from '../../device-agent/agent.js';
import { systemClock } from '../../device-agent/clock.js';
import { createSimDriver } from '../../device-agent/sim-driver.js';
import { run as historyCommand } from '../../src/cli/history.js';
import { captureIo } from '../../src/cli/io.js';
import { run as rolloutCommand } from '../../src/cli/rollout.js';
import { tempDir, waitFor } from '../support/agent-fixtures.js';
import { agentConfig } from '../support/agent-rig.js';
import { deviceClass, goodProfile, model, network, task, weights } from '../support/api-fixtures.js';

const ADMIN = 'demo-data-fleet-admin-token-0123456789';
const DEVICES = 6;
const ids = Array.from({ length: DEVICES }, (_, i) => `gh-scout-${i}`);

/** Two distinct free loopback ports: both are held open until both are known, so they cannot coincide. */
async function freePorts(): Promise<[number, number]> {
  const open = () =>
    new Promise<ReturnType<typeof createServer>>((resolve, reject) => {
      const s = createServer();
      s.once('error', reject);
      s.listen(0, '127.0.0.1', () => resolve(s));
    });
  const a = await open();
  const b = await open();
  const ports: [number, number] = [(a.address() as { port: number }).port, (b.address() as { port: number }).port];
  await Promise.all([a, b].map((s) => new Promise((r) => s.close(r))));
  return ports;
}

let data: { path: string; remove(): void };
let httpPort = 0;
let mqttPort = 0;
let server: ChildProcess | null = null;
const agents: Agent[] = [];
const agentDirs: Array<{ remove(): void }> = [];
const base = () => `http://127.0.0.1:${httpPort}`;

async function startServerProcess(): Promise<ChildProcess> {
  const child = spawn(
    process.execPath,
    ['--import', 'tsx', 'src/cli/main.ts', 'serve', '--data', data.path, '--port', String(httpPort), '--mqtt-port', String(mqttPort)],
    { cwd: process.cwd(), env: { ...process.env, OCELLUS_ADMIN_TOKEN: ADMIN }, stdio: ['ignore', 'pipe', 'pipe'] },
  );
  let stderr = '';
  child.stderr!.on('data', (d) => (stderr += String(d)));
  await new Promise<void>((resolve, reject) => {
    let out = '';
    child.stdout!.on('data', (d) => {
      out += String(d);
      if (/^http:\/\/\S+\n/m.test(out)) resolve();
    });
    child.once('exit', (code) => reject(new Error(`serve exited early with ${code}: ${stderr}`)));
    // Bounded: a server that neither starts nor exits fails the test with what it said.
    setTimeout(() => reject(new Error(`serve did not start within 60 s: ${stderr}`)), 60_000).unref();
  });
  return child;
}

async function api<T = any>(method: string, path: string, body?: unknown): Promise<{ status: number; body: T }> {
  const headers: Record<string, string> = { authorization: `Bearer ${ADMIN}` };
  let payload: BodyInit | undefined;
  if (Buffer.isBuffer(body)) {
    payload = new Uint8Array(body);
    headers['content-type'] = 'application/octet-stream';
  } else if (body !== undefined) {
    payload = JSON.stringify(body);
    headers['content-type'] = 'application/json';
  }
  const res = await fetch(`${base()}${path}`, { method, headers, ...(payload !== undefined ? { body: payload } : {}) });
  const text = await res.text();
  return { status: res.status, body: (text ? JSON.parse(text) : null) as T };
}

async function must(method: string, path: string, body?: unknown) {
  const r = await api(method, path, body);
  if (r.status >= 300) throw new Error(`${method} ${path}: ${r.status} ${JSON.stringify(r.body)}`);
  return r.body;
}

beforeAll(async () => {
  data = tempDir('fleet-restart');
  [httpPort, mqttPort] = await freePorts();
  server = await startServerProcess();
  await must('POST', '/api/v1/device-classes', deviceClass);
  await must('POST', '/api/v1/networks', network);
  await must('POST', '/api/v1/models', model);
  await must('PUT', `/api/v1/models/${model.id}/weights`, weights);
  await must('POST', '/api/v1/tasks', task);
  await must('POST', '/api/v1/profiles', goodProfile);
  const key = (await must('GET', '/api/v1/signing-key')) as { publicKeyPem: string };
  for (const id of ids) {
    const enrolled = (await must('POST', '/api/v1/devices', { id, deviceClassId: deviceClass.id, tags: ['greenhouse-b'] })) as { mqtt: { password: string } };
    const dir = tempDir(`fleet-restart-${id}`);
    agentDirs.push(dir);
    const config = agentConfig(id, enrolled.mqtt.password, `mqtt://127.0.0.1:${mqttPort}`, base(), dir.path, {
      deviceClassId: deviceClass.id,
      publicKeyPem: key.publicKeyPem,
      telemetryIntervalS: 0.2,
    });
    const agent = createAgent({ config, driver: createSimDriver({ clock: systemClock, timeScale: 0, seed: agents.length + 1 }) });
    await agent.start();
    agents.push(agent);
  }
  await waitFor(() => agents.every((a) => a.connected()), 'agents connected', 30_000);
}, 120_000);

afterAll(async () => {
  for (const a of agents) await a.stop();
  if (server && server.exitCode === null) {
    const exited = new Promise((r) => server!.once('exit', r));
    server.kill('SIGTERM');
    await exited;
  }
  for (const d of agentDirs) d.remove();
  data?.remove();
});

describe('rollout across a SIGKILL of the server process', () => {
  // One scenario, one test: the CLI's reads below are of the rollout this test ran, never of another test's.
  it('continues where it was after SIGKILL and a restart, assigning no device twice; the CLI reads the same server', async () => {
    const release = (await must('POST', '/api/v1/releases', {
      deviceClassId: deviceClass.id,
      tasks: { fruit: { profileId: goodProfile.id, revision: 1 } },
      defaultTask: 'fruit',
      applyPolicy: 'immediate',
    })) as { release: { id: string } };
    // One device per wave, each wave held until its device reports 6 telemetry frames: the rollout takes a while.
    const created = await api('POST', '/api/v1/rollouts', {
      releaseId: release.release.id,
      target: { tags: ['greenhouse-b'] },
      waves: [1, 1, 1, 1, 1],
      gate: { applyTimeoutS: 120, telemetryFrames: 6, telemetryTimeoutS: 120, latencyTolerance: 0.5 },
    });
    expect(created.status).toBe(201);
    const rolloutId: string = created.body.id;
    await waitFor(async () => (await api('GET', `/api/v1/rollouts/${rolloutId}`)).body.currentWave >= 3, 'rollout reached its third wave', 60_000);

    const killed = new Promise<NodeJS.Signals | null>((r) => server!.once('exit', (_code, signal) => r(signal)));
    server!.kill('SIGKILL');
    expect(await killed).toBe('SIGKILL');
    server = await startServerProcess();

    const done = await waitFor(async () => {
      const r = (await api('GET', `/api/v1/rollouts/${rolloutId}`)).body;
      return r.status === 'completed' || r.status === 'paused' ? r : null;
    }, 'rollout finished after the restart', 90_000);
    expect(done.pauseReason).toBe(null);
    expect(done.status).toBe('completed');
    expect(done.devices.map((d: { status: string }) => d.status)).toEqual(Array(DEVICES).fill('passed'));
    for (const id of ids) {
      const device = (await must('GET', `/api/v1/devices/${id}`)) as { assignments: Array<{ cause: string }> };
      expect(device.assignments.filter((a) => a.cause === `rollout:${rolloutId}`)).toHaveLength(1);
    }
    await waitFor(() => agents.every((a) => a.state().releaseId === release.release.id), 'every agent runs the release');

    // ocellus rollout status and ocellus history read the same server.
    const io = captureIo(process.cwd(), { OCELLUS_TOKEN: ADMIN, OCELLUS_SERVER: base() });
    expect(await rolloutCommand(['status', rolloutId], io)).toBe(0);
    expect(io.out()).toContain(`rollout ${rolloutId}: completed`);
    expect(io.out()).toMatch(/wave 6: 1 device \(1 passed\)/);
    const csv = captureIo(process.cwd(), { OCELLUS_TOKEN: ADMIN, OCELLUS_SERVER: base() });
    expect(await historyCommand([ids[0]!, '--csv'], csv)).toBe(0);
    const lines = csv.out().trim().split('\r\n');
    expect(lines[0]).toBe('deviceId,task,profileId,profileRevision,releaseId,start,end,reason,causeRolloutId,causeActor,causeAssignment,kind,reported,lastKnownTask');
    expect(lines[1]).toContain(`${ids[0]},fruit,${goodProfile.id},1,`);
    expect(lines[1]).toContain(rolloutId);
    const bad = captureIo(process.cwd(), { OCELLUS_TOKEN: ADMIN, OCELLUS_SERVER: base() });
    expect(await historyCommand([ids[0]!, '--from', 'last tuesday'], bad)).toBe(2);
    expect(bad.err()).toContain('--from must be an ISO 8601 time');
    // The validator's report for the class, with the class's fitted calibration once there is enough telemetry.
    const report = await api('GET', `/api/v1/calibration/profiles/${goodProfile.id}/report`);
    expect(report.status).toBe(200);
    expect(report.body.deviceClassId).toBe(deviceClass.id);
    expect(report.body.fit.devices).toBe(DEVICES);
    const fit = report.body.fit;
    const enough = fit.windows >= 20 && fit.frames >= 1000 && fit.devices >= 3;
    expect(fit.enough).toBe(enough);
    expect(report.body.calibration).toEqual(enough ? { latencyFactor: fit.latency.factor, energyFactor: fit.energy.factor, samples: fit.windows } : null);
    expect(['pass', 'warn', 'fail']).toContain(report.body.report.status);
    expect((await api('GET', '/api/v1/calibration/profiles/no-such-profile/report')).status).toBe(404);
    const missing = captureIo(process.cwd(), { OCELLUS_TOKEN: ADMIN, OCELLUS_SERVER: base() });
    expect(await rolloutCommand(['resume', rolloutId], missing)).toBe(2);
    expect(missing.err()).toContain('is completed');
  });
});
