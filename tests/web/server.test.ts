/** The console's server side without a browser: whoami, the change stream, the device events route, serving the bundle. */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApp, createChangeFeed, createSigner, type ChangeFeed } from '../../src/api/index.js';
import { generateSigningKeyPair } from '../../src/protocol/signing.js';
import { createBlobStore, loadOrCreateSigningKey } from '../../src/store/index.js';
import { createHarness, deviceClass, removeDir, seedCatalog, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
let changes: ChangeFeed;
let consoleDir: string;
let app: ReturnType<typeof createApp>;

/** A JSON call to this file's app (with its change feed and fixture bundle), as the admin unless a token is given. */
async function call(method: string, path: string, options: { token?: string | null; body?: unknown } = {}): Promise<Response> {
  const token = options.token === undefined ? h.tokens.admin : options.token;
  const headers: Record<string, string> = token === null ? {} : { authorization: `Bearer ${token}` };
  if (options.body !== undefined) headers['content-type'] = 'application/json';
  return app.request(path, { method, headers, ...(options.body !== undefined ? { body: JSON.stringify(options.body) } : {}) });
}

beforeAll(async () => {
  const dir = tempDataDir();
  consoleDir = join(dir, 'console-bundle');
  mkdirSync(join(consoleDir, 'assets'), { recursive: true });
  writeFileSync(join(consoleDir, 'index.html'), '<!doctype html><title>Ocellus console</title><script type="module" src="/assets/app-1a2b.js"></script>');
  writeFileSync(join(consoleDir, 'assets', 'app-1a2b.js'), 'console.log("demo data")');
  writeFileSync(join(dir, 'secret.txt'), 'not for the web');
  h = createHarness(dir);
  // An app on the harness's store with a change feed and the fixture bundle the tests can see.
  changes = createChangeFeed();
  app = createApp({
    store: h.store,
    blobs: createBlobStore(dir),
    signer: createSigner(loadOrCreateSigningKey(dir, generateSigningKeyPair)),
    changes,
    consoleDir,
    onError: (e) => {
      throw e;
    },
  });
  await seedCatalog(h, { profiles: [] });
});

afterAll(() => {
  h.closeStore();
  removeDir(h.dir);
});

describe('whoami', () => {
  it("tells a viewer's role and lists the routes it may call, without the ones it may not", async () => {
    const res = await call('GET', '/api/v1/whoami', { token: h.tokens.viewer });
    expect(res.status).toBe(200);
    const who = (await res.json()) as { role: string; actor: string; allowed: string[] };
    expect(who.role).toBe('viewer');
    expect(who.actor).toMatch(/^test viewer#\d+$/);
    expect(who.allowed).toEqual(expect.arrayContaining(['profiles.list', 'validate', 'devices.history', 'events.stream']));
    expect(who.allowed).not.toContain('profiles.update');
    expect(who.allowed).not.toContain('releases.create');
    expect(who.allowed).not.toContain('rollouts.pause');
  });

  it('an operator may release and steer rollouts but not manage tokens; an engineer may save profiles but not release', async () => {
    const op = (await (await call('GET', '/api/v1/whoami', { token: h.tokens.operator })).json()) as { allowed: string[] };
    expect(op.allowed).toEqual(expect.arrayContaining(['releases.create', 'rollouts.create', 'rollouts.pause', 'rollouts.resume', 'rollouts.rollback', 'devices.assign']));
    expect(op.allowed).not.toContain('tokens.create');
    const eng = (await (await call('GET', '/api/v1/whoami', { token: h.tokens.engineer })).json()) as { allowed: string[] };
    expect(eng.allowed).toContain('profiles.update');
    expect(eng.allowed).not.toContain('releases.create');
  });

  it('refuses a call without a token (401) and with an unknown one (401)', async () => {
    expect((await call('GET', '/api/v1/whoami', { token: null })).status).toBe(401);
    expect((await call('GET', '/api/v1/whoami', { token: 'no-such-token' })).status).toBe(401);
  });
});

/** Reads server-sent events from a streaming response (WHATWG HTML, "server-sent events": blocks end with a blank line). */
function sseReader(res: Response) {
  const reader = res.body!.pipeThrough(new TextDecoderStream()).getReader();
  let buffer = '';
  return {
    async next(): Promise<{ event: string; data: any }> {
      for (;;) {
        const end = buffer.indexOf('\n\n');
        if (end >= 0) {
          const block = buffer.slice(0, end);
          buffer = buffer.slice(end + 2);
          const event = /^event: ?(.*)$/m.exec(block)?.[1] ?? 'message';
          const data = /^data: ?(.*)$/m.exec(block)?.[1];
          if (data !== undefined) return { event, data: JSON.parse(data) };
          continue;
        }
        const { value, done } = await reader.read();
        if (done) throw new Error('the stream ended');
        buffer += value;
      }
    },
    cancel: () => reader.cancel(),
  };
}

describe('event stream of fleet changes', () => {
  it('says hello, then sends each successful change made through the API and each device change the bus reports; refusals send nothing', async () => {
    const res = await call('GET', '/api/v1/events/stream', { token: h.tokens.viewer });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toContain('text/event-stream');
    const stream = sseReader(res);
    expect((await stream.next()).event).toBe('hello');

    // Refused (unknown device class): no change. Then a real enrolment: one change naming its route.
    expect((await call('POST', '/api/v1/devices', { body: { id: 'gh-s-01', deviceClassId: 'no-such-class' } })).status).toBe(400);
    expect((await call('POST', '/api/v1/devices', { body: { id: 'gh-s-01', deviceClassId: deviceClass.id, tags: ['demo'] } })).status).toBe(201);
    const change = await stream.next();
    expect(change).toEqual({ event: 'change', data: { kind: 'api', method: 'POST', route: '/api/v1/devices', path: '/api/v1/devices' } });

    changes.publish({ kind: 'devices', deviceIds: ['gh-s-01'] });
    expect(await stream.next()).toEqual({ event: 'change', data: { kind: 'devices', deviceIds: ['gh-s-01'] } });
    await stream.cancel();
  });

  it('needs a token like every other route', async () => {
    expect((await call('GET', '/api/v1/events/stream', { token: null })).status).toBe(401);
  });
});

describe("a device's events in a window", () => {
  beforeAll(() => {
    const events = h.store.deviceEvents;
    const rows = [
      { seq: 1, ts: '2026-03-02T08:00:00.000Z', type: 'agent-started', body: { agentVersion: '0.1.0' } },
      { seq: 2, ts: '2026-03-02T08:00:01.000Z', type: 'release-applied', body: { releaseId: 'gh-test-scout-v1', version: 1 } },
      { seq: 3, ts: '2026-03-02T08:05:00.000Z', type: 'telemetry', body: { task: 'count', frames: 50, inferenceMsMean: 4 } },
      { seq: 4, ts: '2026-03-02T09:00:00.000Z', type: 'telemetry', body: { task: 'count', frames: 60, inferenceMsMean: 4.2 } },
    ];
    events.insert(
      'gh-s-01',
      rows.map((r) => ({ seq: r.seq, ts: r.ts, type: r.type, json: JSON.stringify({ seq: r.seq, ts: r.ts, type: r.type, ...r.body }) })),
      '2026-03-02T09:00:05.000Z',
    );
  });

  it('returns the events whose device time falls in [from, to), oldest first, with their fields', async () => {
    const res = await call('GET', '/api/v1/devices/gh-s-01/events?from=2026-03-02T08:00:00Z&to=2026-03-02T09:00:00Z', { token: h.tokens.viewer });
    expect(res.status).toBe(200);
    const body = (await res.json()) as { events: Array<{ seq: number; type: string; releaseId?: string }>; truncated: boolean };
    expect(body.events.map((e) => e.seq)).toEqual([1, 2, 3]);
    expect(body.events[1]).toMatchObject({ type: 'release-applied', releaseId: 'gh-test-scout-v1' });
    expect(body.truncated).toBe(false);
  });

  it('keeps one type, and says when the limit cut the window short', async () => {
    const typed = (await (await call('GET', '/api/v1/devices/gh-s-01/events?from=2026-03-02T07:00:00Z&to=2026-03-02T10:00:00Z&type=telemetry')).json()) as { events: Array<{ seq: number }> };
    expect(typed.events.map((e) => e.seq)).toEqual([3, 4]);
    const cut = (await (await call('GET', '/api/v1/devices/gh-s-01/events?from=2026-03-02T07:00:00Z&to=2026-03-02T10:00:00Z&limit=2')).json()) as { events: unknown[]; truncated: boolean };
    expect(cut.events).toHaveLength(2);
    expect(cut.truncated).toBe(true);
  });

  it('names what is wrong: an unknown device (404), a window ending before it starts (400, from), a bad type (400, type)', async () => {
    expect((await call('GET', '/api/v1/devices/gh-nobody/events')).status).toBe(404);
    const backwards = await call('GET', '/api/v1/devices/gh-s-01/events?from=2026-03-02T10:00:00Z&to=2026-03-02T09:00:00Z');
    expect(backwards.status).toBe(400);
    expect(((await backwards.json()) as { issues: Array<{ path: string }> }).issues[0]?.path).toBe('from');
    const badType = await call('GET', '/api/v1/devices/gh-s-01/events?type=DROP%20TABLE');
    expect(badType.status).toBe(400);
    expect(((await badType.json()) as { issues: Array<{ path: string }> }).issues[0]?.path).toBe('type');
  });
});

describe('serving the console', () => {
  it('serves index.html on / (revalidated on every load) and hashed assets for a year', async () => {
    const index = await app.request('/');
    expect(index.status).toBe(200);
    expect(index.headers.get('content-type')).toContain('text/html');
    expect(index.headers.get('cache-control')).toBe('no-cache');
    expect(await index.text()).toContain('Ocellus console');
    const asset = await app.request('/assets/app-1a2b.js');
    expect(asset.status).toBe(200);
    expect(asset.headers.get('content-type')).toContain('text/javascript');
    expect(asset.headers.get('cache-control')).toContain('immutable');
  });

  it('never serves a file outside the bundle, and leaves unknown paths to the API 404', async () => {
    for (const path of ['/assets/../../secret.txt', '/assets/%2e%2e/%2e%2e/secret.txt', '/assets/..%2f..%2fsecret.txt']) {
      const res = await app.request(path);
      expect(res.status, path).toBe(404);
      expect(await res.text(), path).not.toContain('not for the web');
    }
    expect((await app.request('/assets/nothing.js')).status).toBe(404);
    expect((await app.request('/settings')).status).toBe(404);
  });

  it('without a built bundle, / explains how to build it (503) and the API still answers', async () => {
    const bare = createApp({
      store: h.store,
      blobs: createBlobStore(h.dir),
      signer: createSigner(loadOrCreateSigningKey(h.dir, generateSigningKeyPair)),
      consoleDir: join(h.dir, 'no-bundle-here'),
    });
    const res = await bare.request('/');
    expect(res.status).toBe(503);
    expect(await res.text()).toContain('npm run build:console');
    expect((await bare.request('/api/v1/profiles', { headers: { authorization: `Bearer ${h.tokens.viewer}` } })).status).toBe(200);
  });
});
