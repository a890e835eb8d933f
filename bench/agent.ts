// Agent bench: start-up time to a broker connection, switch overhead inside the agent, resident memory of an
// agent process, and the bridge's event-storage rate. Everything runs on loopback. The first switch figures use
// the simulated driver at time scale 0, so they are the agent's own overhead (actuation is reported separately);
// the V4L2 figure runs the real V4L2 driver against the v4l2-ctl stand-in and subtracts the stand-in's own run
// time (spawn to exit of each v4l2-ctl), and agent-rss is that agent: V4L2 driver plus the ROS 2 task source.
import { signedReleaseText } from '../src/protocol/release.js';
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:http';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import mqtt from 'mqtt';
import { createBridge } from '../src/bus/bridge.js';
import { startEmbeddedBroker } from '../src/bus/broker.js';
import { PROTOCOL_VERSION, RELEASE_FORMAT, deviceTopic, generateSigningKeyPair, signRelease, type Release } from '../src/protocol/index.js';
import { openStore } from '../src/store/index.js';
import { callControl } from '../device-agent/control-client.js';
import { AGENT_NODE_FLAGS, bundleAgent } from './agent-bundle.js';
import { benchDeviceClass, benchTask, benchV4l2DeviceClass } from './agent-fixture.js';
import { startRosbridge } from '../tests/support/rosbridge-rig.js';
import { v4l2Standin } from '../tests/support/v4l2-rig.js';
import type { BenchFigure } from './figure.js';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const SWITCH_WARMUP = 300;
const SWITCHES = 3000;
const V4L2_WARMUP = 20;
const V4L2_SWITCHES = 300;
const START_RUNS = 3;
const EVENT_DEVICES = 50;
const EVENT_BATCHES_PER_DEVICE = 20;
const EVENTS_PER_BATCH = 100;

function percentile(values: number[], p: number): number {
  const sorted = [...values].sort((a, b) => a - b);
  return sorted[Math.min(sorted.length - 1, Math.ceil((p / 100) * sorted.length) - 1)]!;
}

function figure(name: string, value: number, unit: string, target: number): BenchFigure {
  return { name, value: Number(value.toFixed(4)), unit, target, ok: value <= target };
}

function rssMb(pid: number): number {
  const line = readFileSync(`/proc/${pid}/status`, 'utf8').split('\n').find((l) => l.startsWith('VmRSS:'))!;
  return Number(/(\d+)/.exec(line)![1]) / 1024;
}

function waitForLine(child: ChildProcess, pattern: RegExp): Promise<void> {
  return new Promise((resolve, reject) => {
    let seen = '';
    child.stdout!.on('data', (c: Buffer) => {
      seen += c.toString('utf8');
      if (pattern.test(seen)) resolve();
    });
    child.once('exit', (code) => reject(new Error(`agent exited (${code}) before ${pattern}: ${seen}`)));
  });
}

export async function run(): Promise<BenchFigure[]> {
  const work = mkdtempSync(join(tmpdir(), 'ocellus-bench-agent-'));
  const store = openStore(join(work, 'server'));
  const serverUser = { username: 'bench-server', password: 'bench-server-secret' };
  const broker = await startEmbeddedBroker({ port: 0, serverUser, authenticate: (id, pw) => store.verifyDeviceCredentials(id, pw) });
  const client = await mqtt.connectAsync(broker.url, { ...serverUser, reconnectPeriod: 0 });
  const bridge = createBridge({ mqttClient: client, store, clock: { now: () => new Date() } });
  const keys = generateSigningKeyPair();
  const weights = new Map<string, Buffer>();
  const web = createServer((req, res) => {
    const body = weights.get(new URL(req.url ?? '/', 'http://x').pathname);
    if (!body) return void res.writeHead(404).end();
    res.writeHead(200, { 'content-length': body.length }).end(body);
  });
  await new Promise<void>((r) => web.listen(0, '127.0.0.1', r));
  const serverUrl = `http://127.0.0.1:${(web.address() as { port: number }).port}`;
  const children: ChildProcess[] = [];
  try {
    const agentMain = await bundleAgent(work, ROOT);
    const release: Release = {
      format: RELEASE_FORMAT, id: 'bench-rel-1', version: 1, deviceClassId: benchDeviceClass.id, deviceClass: benchDeviceClass,
      createdAt: new Date().toISOString(), createdBy: 'bench (demo data)', audience: { deviceClassId: benchDeviceClass.id }, expiresAt: '2099-01-01T00:00:00.000Z', applyPolicy: 'immediate', defaultTask: 'rows',
      tasks: { rows: benchTask('rows-net', weights, 0.5, 4), leaves: benchTask('leaf-net', weights, 0.25, 2.8) },
    };
    const keyPath = join(work, 'server.pem');
    writeFileSync(keyPath, keys.publicKeyPem);

    async function startAgent(
      deviceId: string, deviceClassId = benchDeviceClass.id, extra: string[] = [], env: NodeJS.ProcessEnv = process.env,
    ): Promise<{ child: ChildProcess; startMs: number; controlPort: number }> {
      const enrolled = store.devices.enrol({ id: deviceId, deviceClassId, tags: [], actor: 'bench', at: new Date().toISOString() })!;
      const dataDir = join(work, deviceId);
      const args = [
        agentMain, '--device-id', deviceId, '--device-class-id', deviceClassId, '--broker-url', broker.url, '--password', enrolled.password,
        '--server-url', serverUrl, '--public-key-path', keyPath, '--data-dir', dataDir, '--control-port', '0', '--sim-time-scale', '0', ...extra,
      ];
      const t0 = performance.now();
      const child = spawn(process.execPath, [...AGENT_NODE_FLAGS, ...args], { cwd: ROOT, env, stdio: ['ignore', 'pipe', 'inherit'] });
      children.push(child);
      const controlOpen = waitForLine(child, /agent: control endpoint/);
      await waitForLine(child, /agent: connected to/);
      const startMs = performance.now() - t0;
      await controlOpen;
      const control = JSON.parse(readFileSync(join(dataDir, 'control.json'), 'utf8')) as { port: number };
      return { child, startMs, controlPort: control.port };
    }

    // Start-up: process spawn to broker connection, median of a few cold starts.
    const startTimes: number[] = [];
    for (let i = 0; i < START_RUNS; i++) {
      const a = await startAgent(`bench-start-${i}`);
      startTimes.push(a.startMs);
      a.child.kill('SIGKILL');
    }

    // Switches: one agent with a release applied, alternating tasks through the loopback control endpoint.
    const agent = await startAgent('bench-switch');
    await bridge.publishRelease('bench-switch', signedReleaseText(signRelease(release, keys.privateKeyPem, keys.publicKeyPem)));
    const endpoint = { kind: 'tcp' as const, host: '127.0.0.1', port: agent.controlPort };
    for (;;) {
      const s = (await callControl(endpoint, 'GET', '/state')).body as { releaseId: string | null };
      if (s.releaseId === release.id) break;
      await new Promise((r) => setTimeout(r, 20));
    }
    const overheads: number[] = [];
    for (let i = 0; i < SWITCH_WARMUP + SWITCHES; i++) {
      const r = await callControl(endpoint, 'POST', '/task', { task: i % 2 === 0 ? 'leaves' : 'rows' });
      const body = r.body as { ok: boolean; overheadMs: number };
      if (!body.ok) throw new Error(`bench: switch refused: ${JSON.stringify(body)}`);
      if (i >= SWITCH_WARMUP) overheads.push(body.overheadMs);
    }
    const rssSim = rssMb(agent.child.pid!);
    agent.child.kill('SIGKILL');

    // V4L2 driver against the v4l2-ctl stand-in, with the ROS 2 task source on a loopback rosbridge.
    const standin = v4l2Standin(work);
    standin.setCameras({ '/dev/video0': { fixture: 'uvc-rowcam', frameRates: [10, 15, 30] } });
    const ros = await startRosbridge();
    const v4l2Overheads: number[] = [];
    let rss = 0;
    try {
      const v4l2 = await startAgent('bench-v4l2', benchV4l2DeviceClass.id, ['--driver', 'v4l2', '--task-source', 'ros2', '--rosbridge-url', ros.url], standin.env);
      const v4l2Release: Release = {
        ...release, id: 'bench-rel-v4l2', deviceClassId: benchV4l2DeviceClass.id, deviceClass: benchV4l2DeviceClass,
        tasks: {
          rows: { ...benchTask('rows-net', weights, 0.5, 2.8), frameRateHz: 10 },
          leaves: { ...benchTask('leaf-net', weights, 0.25, 2.8), camera: { focusDistanceM: 0.25, fNumber: 2.8, exposureUs: 4000, analogGain: 4 }, frameRateHz: 15 },
        },
      };
      await bridge.publishRelease('bench-v4l2', signedReleaseText(signRelease(v4l2Release, keys.privateKeyPem, keys.publicKeyPem)));
      const v4l2Endpoint = { kind: 'tcp' as const, host: '127.0.0.1', port: v4l2.controlPort };
      for (;;) {
        const s = (await callControl(v4l2Endpoint, 'GET', '/state')).body as { activeTask: string | null };
        if (s.activeTask === 'rows') break;
        await new Promise((r) => setTimeout(r, 20));
      }
      for (let i = 0; i < V4L2_WARMUP + V4L2_SWITCHES; i++) {
        const r = await callControl(v4l2Endpoint, 'POST', '/task', { task: i % 2 === 0 ? 'leaves' : 'rows' });
        const body = r.body as { ok: boolean; overheadMs: number; actuationMs: number; toolMs: number };
        if (!body.ok) throw new Error(`bench: V4L2 switch refused: ${JSON.stringify(body)}`);
        // Everything but the stand-in's own run time: the agent, the driver's planning, parsing and spawning.
        if (i >= V4L2_WARMUP) v4l2Overheads.push(body.overheadMs + body.actuationMs - body.toolMs);
      }
      rss = rssMb(v4l2.child.pid!);
      v4l2.child.kill('SIGKILL');
    } finally {
      await ros.stop();
    }

    // Bridge: events from many devices, stored and acked.
    const ids = Array.from({ length: EVENT_DEVICES }, (_v, i) => `bench-ev-${i}`);
    for (const id of ids) store.devices.enrol({ id, deviceClassId: benchDeviceClass.id, tags: [], actor: 'bench', at: new Date().toISOString() });
    const payloads = ids.map(() => Array.from({ length: EVENT_BATCHES_PER_DEVICE }, (_v, b) => JSON.stringify({
      v: PROTOCOL_VERSION,
      events: Array.from({ length: EVENTS_PER_BATCH }, (_w, k) => ({ seq: b * EVENTS_PER_BATCH + k + 1, ts: new Date().toISOString(), type: 'motion', moving: k % 2 === 0 })),
    })));
    const total = EVENT_DEVICES * EVENT_BATCHES_PER_DEVICE * EVENTS_PER_BATCH;
    const before = bridge.stats().eventsStored;
    const t0 = performance.now();
    const sends: Promise<unknown>[] = [];
    for (let b = 0; b < EVENT_BATCHES_PER_DEVICE; b++) ids.forEach((id, d) => sends.push(client.publishAsync(deviceTopic(id, 'events'), payloads[d]![b]!, { qos: 1 })));
    await Promise.all(sends);
    while (bridge.stats().eventsStored - before < total) await new Promise((r) => setTimeout(r, 5));
    const eventsPerS = total / ((performance.now() - t0) / 1000);

    return [
      figure('agent-switch-p50', percentile(overheads, 50), 'ms', 0.5),
      figure('agent-switch-p99', percentile(overheads, 99), 'ms', 2),
      figure('agent-switch-v4l2-p99', percentile(v4l2Overheads, 99), 'ms', 5),
      figure('agent-rss', rss, 'MB', 60),
      figure('agent-rss-sim', rssSim, 'MB', 60),
      figure('agent-start', percentile(startTimes, 50), 'ms', 500),
      { name: 'bridge-events', value: Math.round(eventsPerS), unit: 'events/s', target: 20_000, ok: eventsPerS >= 20_000 },
    ];
  } finally {
    for (const c of children) if (c.exitCode === null) c.kill('SIGKILL');
    await bridge.close();
    await client.endAsync(true);
    await broker.close();
    await new Promise<void>((r) => web.close(() => r()));
    store.close();
    rmSync(work, { recursive: true, force: true });
  }
}
