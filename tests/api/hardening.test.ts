import { connect as tcpConnect } from 'node:net';
import type { AddressInfo } from 'node:net';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { serve, type ServerType } from '@hono/node-server';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApp, createSigner } from '../../src/api/index.js';
import { createMetricsRegistry, type MetricsRegistry } from '../../src/metrics/registry.js';
import { generateSigningKeyPair } from '../../src/protocol/signing.js';
import { createBlobStore, hashPassword, loadOrCreateSigningKey, type Store } from '../../src/store/index.js';
import { sqlHandle } from '../../src/store/sqlite-handle.js';
import { openTestStore } from '../support/store-backend.js';
import { deviceClass, model, network, removeDir, tempDataDir, weights } from '../support/api-fixtures.js';

// A real HTTP server on a free loopback port, so sockets, aborts and concurrency are the real ones.
let dir: string;
let store: Store;
let metrics: MetricsRegistry;
let http: ServerType;
let base: string;
const faults: unknown[] = [];
const tokens: Record<string, { id: number; secret: string }> = {};

beforeAll(async () => {
  dir = tempDataDir();
  store = openTestStore(dir);
  metrics = createMetricsRegistry();
  const app = createApp({
    store,
    blobs: createBlobStore(dir),
    signer: createSigner(loadOrCreateSigningKey(dir, generateSigningKeyPair)),
    metrics,
    limits: { maxEventStreamsPerToken: 2 },
    consoleDir: dir,
    onError: (e) => faults.push(e),
  });
  const at = new Date().toISOString();
  for (const [name, role] of [['admin', 'admin'], ['viewer', 'viewer'], ['viewer2', 'viewer']] as const) {
    const t = store.tokens.create({ role, label: name, actor: 'test', at });
    tokens[name] = { id: t.token.id, secret: t.secret };
  }
  http = serve({ fetch: app.fetch, port: 0, hostname: '127.0.0.1' });
  await new Promise<void>((resolve) => http.once('listening', () => resolve()));
  base = `http://127.0.0.1:${(http.address() as AddressInfo).port}`;
  for (const [path, body] of [['/api/v1/device-classes', deviceClass], ['/api/v1/networks', network], ['/api/v1/models', model]] as const) {
    const created = await call("POST", path, { body: JSON.stringify(body) });
    expect(created.status, await created.clone().text()).toBe(201);
  }
  expect((await call('PUT', `/api/v1/models/${model.id}/weights`, { body: new Uint8Array(weights), type: 'application/octet-stream' })).status).toBe(201);
  // A device enrolled before keyed hashes: its stored hash is scrypt, the costly case for a bad login.
  store.devices.enrol({ id: 'gh-b-01', deviceClassId: deviceClass.id, tags: [], actor: 'test', at });
  sqlHandle(store).prepare('UPDATE devices SET password_hash = ? WHERE id = ?').run(hashPassword('legacy-secret'), 'gh-b-01');
});
afterAll(async () => {
  (http as import('node:http').Server).closeAllConnections();
  await new Promise<void>((resolve) => http.close(() => resolve()));
  store.close();
  removeDir(dir);
});

function call(method: string, path: string, options: { token?: string; body?: BodyInit; type?: string; headers?: Record<string, string> } = {}) {
  return fetch(`${base}${path}`, {
    method,
    headers: { authorization: `Bearer ${options.token ?? tokens.admin!.secret}`, 'content-type': options.type ?? 'application/json', ...options.headers },
    ...(options.body !== undefined ? { body: options.body } : {}),
  });
}

describe('device Basic auth on the weights route', () => {
  it('100 bad logins complete while a concurrent viewer request is answered, without stalling the event loop', async () => {
    const delay = monitorEventLoopDelay({ resolution: 10 });
    delay.enable();
    const bad = Array.from({ length: 100 }, (_, i) =>
      fetch(`${base}/api/v1/models/${model.id}/weights`, { headers: { authorization: `Basic ${Buffer.from(`gh-b-01:wrong-${i}`).toString('base64')}` } }).then((r) => r.status),
    );
    const viewer = call('GET', '/api/v1/device-classes', { token: tokens.viewer!.secret }).then((r) => r.status);
    const statuses = await Promise.all(bad);
    expect(await viewer).toBe(200);
    delay.disable();
    expect(statuses.every((s) => s === 401 || s === 429)).toBe(true);
    expect(statuses.filter((s) => s === 429).length).toBeGreaterThan(0);
    // Not a speed figure: scrypt on the event loop (N = 2^14, tens of ms a check) would block it for seconds
    // in total; a bound of one second is far above any scheduling noise of a loaded machine.
    expect(delay.max / 1e6).toBeLessThan(1000);
    const rendered = metrics.render();
    expect(rendered).toMatch(/ocellus_device_login_failures_total\{reason="bad-credentials",via="http"\} \d+/);
  });

  it('past the per-id limit even the right password waits for the window: 429 with Retry-After', async () => {
    const res = await fetch(`${base}/api/v1/models/${model.id}/weights`, { headers: { authorization: `Basic ${Buffer.from('gh-b-01:legacy-secret').toString('base64')}` } });
    expect(res.status).toBe(429);
    expect(res.headers.get('retry-after')).toBe('60');
  });

  it('a correct legacy password logs in, and its scrypt hash is replaced by the keyed hash', async () => {
    store.devices.enrol({ id: 'gh-b-02', deviceClassId: deviceClass.id, tags: [], actor: 'test', at: new Date().toISOString() });
    sqlHandle(store).prepare('UPDATE devices SET password_hash = ? WHERE id = ?').run(hashPassword('legacy-secret-2'), 'gh-b-02');
    const res = await fetch(`${base}/api/v1/models/${model.id}/weights`, { headers: { authorization: `Basic ${Buffer.from('gh-b-02:legacy-secret-2').toString('base64')}` } });
    // Logged in (not 401); 403 because a device may fetch only the weights of releases it is assigned.
    expect(res.status).toBe(403);
    expect(sqlHandle(store).prepare('SELECT password_hash FROM devices WHERE id = ?').pluck().get('gh-b-02')).toMatch(/^hmac-sha256\$/);
  });
});

describe('event streams', () => {
  async function openStream(token: string) {
    const controller = new AbortController();
    const res = await fetch(`${base}/api/v1/events/stream`, { headers: { authorization: `Bearer ${token}` }, signal: controller.signal });
    return { res, controller };
  }

  it('are capped per token (429) while another token still gets one, and a revoked token\'s streams end at once', async () => {
    const a = await openStream(tokens.viewer!.secret);
    const b = await openStream(tokens.viewer!.secret);
    expect([a.res.status, b.res.status]).toEqual([200, 200]);
    const third = await openStream(tokens.viewer!.secret);
    expect(third.res.status).toBe(429);
    const other = await openStream(tokens.viewer2!.secret);
    expect(other.res.status).toBe(200);

    const readAll = async (res: Response) => {
      const reader = res.body!.getReader();
      for (;;) if ((await reader.read()).done) return 'ended';
    };
    const endedA = readAll(a.res);
    const endedB = readAll(b.res);
    expect((await call('POST', `/api/v1/tokens/${tokens.viewer!.id}/revoke`)).status).toBe(200);
    const deadline = new Promise((resolve) => setTimeout(() => resolve('still open'), 3000));
    expect(await Promise.race([Promise.all([endedA, endedB]).then(() => 'ended'), deadline])).toBe('ended');
    expect(metrics.render()).toMatch(/ocellus_event_streams_refused_total\{reason="token-limit"\} 1/);
    other.controller.abort();
  });
});

describe('HTTP hygiene', () => {
  it('answers 400, not 500, to bad percent-encodings', async () => {
    for (const path of ['/assets/%', '/assets/%zz.js', '/api/v1/devices/%E0%A4%A']) {
      const res = await call('GET', path);
      expect(res.status, path).toBe(400);
      expect(((await res.json()) as { error: string }).error).toMatch(/percent-encoding/);
    }
    expect(faults).toEqual([]);
  });

  it('sends CSP with frame-ancestors, X-Frame-Options and nosniff', async () => {
    for (const path of ['/', '/api/v1/openapi.json']) {
      const res = await fetch(`${base}${path}`);
      const csp = res.headers.get('content-security-policy') ?? '';
      expect(csp, path).toContain("frame-ancestors 'none'");
      expect(csp).toContain("script-src 'self'");
      expect(csp).toContain("object-src 'none'");
      expect(res.headers.get('x-frame-options')).toBe('DENY');
      expect(res.headers.get('x-content-type-options')).toBe('nosniff');
    }
  });

  it('does not report an upload the client cut off as a server fault', async () => {
    const socket = tcpConnect(Number(new URL(base).port), '127.0.0.1');
    await new Promise<void>((resolve) => socket.once('connect', () => resolve()));
    socket.on('error', () => undefined);
    socket.write(
      `PUT /api/v1/models/${model.id}/weights HTTP/1.1\r\nHost: 127.0.0.1\r\nAuthorization: Bearer ${tokens.admin!.secret}\r\n` +
        `Content-Type: application/octet-stream\r\nContent-Length: ${weights.length}\r\n\r\n`,
    );
    socket.write(weights.subarray(0, 20_000));
    await new Promise((r) => setTimeout(r, 100));
    socket.destroy();
    const route = 'route="/api/v1/models/:id/weights"';
    const deadline = Date.now() + 5000;
    while (!metrics.render().split('\n').some((l) => l.includes(route) && l.includes('method="PUT"') && l.includes('status="499"')) && Date.now() < deadline) {
      await new Promise((r) => setTimeout(r, 20));
    }
    expect(metrics.render().split('\n').some((l) => l.includes(route) && l.includes('status="499"'))).toBe(true);
    expect(faults).toEqual([]);
  });
});
