import { execFileSync } from 'node:child_process';
import { appendFileSync, existsSync, mkdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { createServer, request, type Server } from 'node:http';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { signedReleaseText } from '../../src/protocol/release.js';
import { downloadWithResume, OversizeError } from '../../device-agent/weights-fetch.js';
import { demoRelease, sign, tempDir, waitFor } from '../support/agent-fixtures.js';
import { agentSuite } from '../support/agent-suite.js';
import type { AgentConfig } from '../../device-agent/config.js';

const suite = agentSuite({ rows: 'hard rows-net', leaves: 'hard leaf-net' });
const { leaves, tasks } = suite;
const newAgent = (label: string, dataDir?: string, extra: Partial<AgentConfig> = {}) => suite.newAgent(label, { ...(dataDir !== undefined ? { dataDir } : {}), extra });

/** A raw HTTP request to the control endpoint, with whatever headers a browser or a rebound page would send. */
function rawControl(port: number, method: string, path: string, headers: Record<string, string>, body?: string): Promise<{ status: number; body: { ok: boolean; error?: string } }> {
  return new Promise((resolve, reject) => {
    const req = request({ host: '127.0.0.1', port, method, path, headers: { ...headers, ...(body ? { 'content-length': String(Buffer.byteLength(body)) } : {}) }, timeout: 5000 }, (res) => {
      const chunks: Buffer[] = [];
      res.on('data', (c: Buffer) => chunks.push(c));
      res.on('end', () => resolve({ status: res.statusCode ?? 0, body: JSON.parse(Buffer.concat(chunks).toString('utf8')) }));
    });
    req.on('error', reject);
    req.end(body);
  });
}

describe('local control endpoint', () => {
  it('refuses any Origin, a foreign Host and a body that is not application/json; takes a local JSON request', async () => {
    const { id, rig } = await newAgent('ctl');
    await suite.bus.bridge.publishRelease(id, signedReleaseText(sign(demoRelease('rel-ctl1', 1, tasks))));
    await waitFor(() => rig.agent.state().activeTask === 'rows', 'rows running');
    const ep = rig.agent.controlEndpoint();
    if (ep?.kind !== 'tcp') throw new Error('expected the TCP endpoint the test asked for');
    const host = `127.0.0.1:${ep.port}`;
    const body = JSON.stringify({ task: 'leaves' });
    // A page on the robot's browser: cross-origin POST with a CORS-safelisted type (no preflight in the Fetch standard).
    const fromPage = await rawControl(ep.port, 'POST', '/task', { host, origin: 'http://intranet.example', 'content-type': 'text/plain' }, body);
    expect(fromPage.status).toBe(403);
    expect(fromPage.body.error).toMatch(/Origin/);
    // DNS rebinding: the attacker's name resolves to 127.0.0.1, so the Host header carries it.
    const rebound = await rawControl(ep.port, 'GET', '/state', { host: `evil.example:${ep.port}` });
    expect(rebound.status).toBe(403);
    expect(rebound.body.error).toMatch(/Host evil\.example/);
    const notJson = await rawControl(ep.port, 'POST', '/task', { host, 'content-type': 'text/plain' }, body);
    expect(notJson.status).toBe(415);
    expect(rig.agent.state().activeTask).toBe('rows');
    const local = await rawControl(ep.port, 'POST', '/task', { host: `localhost:${ep.port}`, 'content-type': 'application/json; charset=utf-8' }, body);
    expect(local).toMatchObject({ status: 200, body: { ok: true } });
    expect(rig.agent.state().activeTask).toBe('leaves');
    await suite.bus.bridge.clearRelease(id);
  });

  it('answers 404 for task names that are properties of every object (constructor, __proto__), not 500', async () => {
    const { id, rig } = await newAgent('proto');
    await suite.bus.bridge.publishRelease(id, signedReleaseText(sign(demoRelease('rel-pr1', 1, tasks))));
    await waitFor(() => rig.agent.state().activeTask === 'rows', 'rows running');
    const ep = rig.agent.controlEndpoint();
    if (ep?.kind !== 'tcp') throw new Error('expected the TCP endpoint the test asked for');
    for (const task of ['constructor', '__proto__', 'toString', 'hasOwnProperty']) {
      const r = await rawControl(ep.port, 'POST', '/task', { host: `127.0.0.1:${ep.port}`, 'content-type': 'application/json' }, JSON.stringify({ task }));
      expect(r.status, task).toBe(404);
      expect(r.body.error).toContain(`task ${task} is not in release rel-pr1`);
    }
    expect(rig.agent.state().activeTask).toBe('rows');
    await suite.bus.bridge.clearRelease(id);
  });

  it('listens on a Unix socket with mode 0600 by default', async () => {
    const dir = suite.dir('sock');
    const { rig } = await newAgent('sock', dir.path, { controlPort: undefined });
    const ep = rig.agent.controlEndpoint();
    expect(ep).toEqual({ kind: 'unix', socketPath: join(dir.path, 'control.sock') });
    expect(statSync(join(dir.path, 'control.sock')).mode & 0o777).toBe(0o600);
  });
});

describe('weights downloads stop at the declared size', () => {
  let server: Server;
  let port = 0;
  beforeAll(async () => {
    // Sends twice the bytes, without Content-Length (chunked), so only counting while streaming can stop it.
    server = createServer((_req, res) => {
      res.writeHead(200, { 'content-type': 'application/octet-stream' });
      res.write(Buffer.alloc(40_000, 1));
      res.end(Buffer.alloc(40_000, 2));
    });
    await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
    port = (server.address() as { port: number }).port;
  });
  afterAll(() => new Promise<void>((r) => server.close(() => r())));

  it('never writes more than the release declares, even when the server sends more', async () => {
    const dir = suite.dir('oversize');
    const partPath = join(dir.path, 'w.part');
    await expect(
      downloadWithResume({ url: `http://127.0.0.1:${port}/w`, username: 'd', password: 'p', partPath, expectedBytes: 50_000 }),
    ).rejects.toBeInstanceOf(OversizeError);
    expect(existsSync(partPath) ? statSync(partPath).size : 0).toBeLessThanOrEqual(50_000);
  });
});

/** A small tmpfs the test can fill: needs root (mount); skipped with the reason otherwise. */
function mountSmallTmpfs(path: string, size: string): boolean {
  try {
    mkdirSync(path, { recursive: true });
    execFileSync('mount', ['-t', 'tmpfs', '-o', `size=${size}`, 'tmpfs', path], { stdio: 'ignore' });
    return true;
  } catch {
    return false;
  }
}

/** Fills the file system until it refuses (ENOSPC); returns the filler's path. */
function fill(dir: string): string {
  const path = join(dir, 'filler.bin');
  const chunk = Buffer.alloc(16 * 1024, 7);
  try {
    for (;;) appendFileSync(path, chunk);
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code !== 'ENOSPC') throw e;
  }
  // The last few bytes too: a write of even one line must fail now.
  try {
    for (;;) appendFileSync(path, 'x');
  } catch {
    // full
  }
  return path;
}

const mountPoint = join(tempDir('tmpfs').path, 'disk');
const mounted = mountSmallTmpfs(mountPoint, '1m');
afterAll(() => {
  // Lazy: the agents' last files close in the other afterAll, whichever runs first.
  if (mounted) execFileSync('umount', ['-l', mountPoint]);
});

describe.skipIf(!mounted)('agent on a full disk (a real 1 MiB tmpfs; skipped when the test cannot mount one, which needs root)', () => {
  it('keeps running and sending events with the disk full, flags it in state, saves the last task once there is room, and restarts on a full disk into it', async () => {
    const dataDir = join(mountPoint, 'agent');
    const { id, rig } = await newAgent('full', dataDir, { telemetryIntervalS: 0.05 });
    await suite.bus.bridge.publishRelease(id, signedReleaseText(sign(demoRelease('rel-full1', 1, tasks))));
    await waitFor(() => rig.agent.state().activeTask === 'rows', 'rows running');
    const filler = fill(mountPoint);
    // Telemetry keeps coming (it crashed the agent before); the events wait in memory and still reach the server.
    await waitFor(() => rig.agent.state().storageFault?.startsWith('event log'), 'storage fault flagged in state');
    await waitFor(() => suite.bus.bridge.deviceStates.get(id) && (suite.bus.bridge.deviceStates.get(id)!.state as { storageFault?: string | null }).storageFault, 'fault reaches the server');
    expect((await rig.agent.setTask('leaves')).ok).toBe(true);
    expect(rig.driver.hardware().weightsSha256).toBe(leaves.sha256);
    // The server stores and acknowledges the events kept in memory, the switch among them.
    const seqNow = rig.agent.state().lastSeq;
    // Telemetry keeps coming every 50 ms, so a few of the newest events are always in flight: what counts is that
    // every event up to the switch is acknowledged (pending events are always the newest ones).
    await waitFor(() => rig.agent.state().storageFault !== null && rig.agent.state().lastSeq - rig.agent.unackedEvents() >= seqNow, 'events acknowledged with the disk full');
    // Room again: the task file and the event log catch up, and the fault clears.
    rmSync(filler);
    await waitFor(() => rig.agent.state().storageFault === null, 'storage fault cleared', 20_000);
    expect(JSON.parse(readFileSync(join(dataDir, 'active-task.json'), 'utf8'))).toEqual({ releaseId: 'rel-full1', task: 'leaves' });
    // Full again, stopped, a torn last line and a temporary file left behind: it starts anyway, into the last task.
    await rig.agent.stop();
    appendFileSync(join(dataDir, 'events.log'), '{"seq":99999,"ts":"2025-01');
    writeFileSync(join(dataDir, 'applied-release.json.tmp-4242'), 'half a release');
    const filler2 = fill(mountPoint);
    const again = await suite.startAgent({ ...rig.config });
    await waitFor(() => again.agent.state().activeTask === 'leaves', 'restarted into the last task on a full disk');
    expect(again.agent.state().releaseId).toBe('rel-full1');
    expect(existsSync(join(dataDir, 'applied-release.json.tmp-4242'))).toBe(false);
    expect(readFileSync(join(dataDir, 'events.log'), 'utf8')).not.toContain('"seq":99999');
    rmSync(filler2);
    await waitFor(() => again.agent.state().storageFault === null, 'room again after the restart', 20_000);
    await suite.bus.bridge.clearRelease(id);
  });
});
