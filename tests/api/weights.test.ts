import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { SignedRelease } from '../../src/protocol/release.js';
import { createHarness, deviceClass, goodProfile, model, network, removeDir, task, tempDataDir, weights, weightsSha256, type Harness } from '../support/api-fixtures.js';

let h: Harness;
const url = `/api/v1/models/${model.id}/weights`;

async function seedModel(harness: Harness, body: unknown = model) {
  await harness.call('POST', '/api/v1/device-classes', { body: deviceClass });
  await harness.call('POST', '/api/v1/networks', { body: network });
  expect((await harness.call('POST', '/api/v1/models', { body })).status).toBe(201);
}

function blobFiles(dir: string): string[] {
  const root = join(dir, 'blobs');
  const out: string[] = [];
  const walk = (d: string) => {
    for (const e of readdirSync(d, { withFileTypes: true })) {
      if (e.isDirectory()) walk(join(d, e.name));
      else out.push(join(d, e.name));
    }
  };
  walk(root);
  return out;
}

beforeEach(async () => {
  h = createHarness(tempDataDir(), { maxWeightsBytes: 150_000 });
  await seedModel(h);
});
afterEach(() => {
  h.closeStore();
  removeDir(h.dir);
});

describe('weights upload', () => {
  it('stores the weights under their sha256 and says so on the model', async () => {
    const res = await h.call('PUT', url, { body: weights, token: h.tokens.engineer });
    expect(res.status).toBe(201);
    expect(await res.json()).toEqual({ modelId: model.id, version: 1, sha256: weightsSha256, sizeBytes: weights.length });
    expect(blobFiles(h.dir)).toEqual([join(h.dir, 'blobs', 'sha256', weightsSha256.slice(0, 2), weightsSha256)]);
    const m = (await (await h.call('GET', `/api/v1/models/${model.id}`)).json()) as { weights: { uploaded: boolean } };
    expect(m.weights.uploaded).toBe(true);
    const audit = h.store.audit.query({ action: 'model.weights.upload' });
    expect(audit).toHaveLength(1);
  });

  it('refuses content whose hash differs from the declared sha256 and leaves no blob and no temporary file', async () => {
    const tampered = Buffer.from(weights);
    tampered[500] = tampered[500]! ^ 0xff;
    const res = await h.call('PUT', url, { body: tampered });
    expect(res.status).toBe(400);
    const body = (await res.json()) as { issues: Array<{ path: string; message: string }> };
    expect(body.issues[0]!.message).toContain(weightsSha256);
    expect(blobFiles(h.dir)).toEqual([]);
    expect(h.store.audit.query({ action: 'model.weights.upload' })).toEqual([]);
  });

  it('refuses weights over the configured size limit with 413, leaving nothing', async () => {
    const big = Buffer.alloc(150_001, 7);
    const res = await h.call('PUT', url, { body: big });
    expect(res.status).toBe(413);
    expect(blobFiles(h.dir)).toEqual([]);
  });

  it('refuses an over-limit body that declares no length, while streaming', async () => {
    const chunk = new Uint8Array(50_000);
    let sent = 0;
    const stream = new ReadableStream<Uint8Array>({
      pull(controller) {
        if (sent >= 4) return controller.close();
        sent += 1;
        controller.enqueue(chunk);
      },
    });
    const res = await h.app.request(url, {
      method: 'PUT',
      headers: { authorization: `Bearer ${h.tokens.engineer}` },
      body: stream,
      duplex: 'half',
    } as RequestInit);
    expect(res.status).toBe(413);
    expect(blobFiles(h.dir)).toEqual([]);
  });
});

describe('weights download', () => {
  beforeEach(async () => {
    expect((await h.call('PUT', url, { body: weights })).status).toBe(201);
  });

  it('sends every byte with the sha256 as a quoted ETag, and 304 when the client has it', async () => {
    const res = await h.call('GET', url, { token: h.tokens.viewer });
    expect(res.status).toBe(200);
    expect(res.headers.get('etag')).toBe(`"${weightsSha256}"`);
    expect(res.headers.get('accept-ranges')).toBe('bytes');
    expect(Buffer.from(await res.arrayBuffer()).equals(weights)).toBe(true);
    const cached = await h.call('GET', url, { token: h.tokens.viewer, headers: { 'if-none-match': `"${weightsSha256}"` } });
    expect(cached.status).toBe(304);
    expect(await cached.text()).toBe('');
  });

  it('serves a byte range as 206 with Content-Range (RFC 9110 §14.4), and a resume from an offset', async () => {
    const part = await h.call('GET', url, { headers: { range: 'bytes=100-199' } });
    expect(part.status).toBe(206);
    expect(part.headers.get('content-range')).toBe(`bytes 100-199/${weights.length}`);
    expect(Buffer.from(await part.arrayBuffer()).equals(weights.subarray(100, 200))).toBe(true);

    // A device that stopped after 60,000 bytes asks for the rest, only if the file is still the same (If-Range).
    const got = weights.subarray(0, 60_000);
    const rest = await h.call('GET', url, { headers: { range: 'bytes=60000-', 'if-range': `"${weightsSha256}"` } });
    expect(rest.status).toBe(206);
    expect(rest.headers.get('content-range')).toBe(`bytes 60000-${weights.length - 1}/${weights.length}`);
    const whole = Buffer.concat([got, Buffer.from(await rest.arrayBuffer())]);
    expect(whole.equals(weights)).toBe(true);

    const suffix = await h.call('GET', url, { headers: { range: 'bytes=-10' } });
    expect(Buffer.from(await suffix.arrayBuffer()).equals(weights.subarray(weights.length - 10))).toBe(true);
  });

  it('answers a range past the end with 416 and the size, and a stale If-Range with the whole file', async () => {
    const res = await h.call('GET', url, { headers: { range: `bytes=${weights.length}-` } });
    expect(res.status).toBe(416);
    expect(res.headers.get('content-range')).toBe(`bytes */${weights.length}`);
    const stale = await h.call('GET', url, { headers: { range: 'bytes=10-', 'if-range': '"0000"' } });
    expect(stale.status).toBe(200);
    expect((await stale.arrayBuffer()).byteLength).toBe(weights.length);
  });

  it('lets an enrolled device fetch with its own id and MQTT password (Basic), and nobody without credentials', async () => {
    const enrol = await h.call('POST', '/api/v1/devices', { body: { id: 'gh-07', deviceClassId: deviceClass.id, tags: [] } });
    const { mqtt } = (await enrol.json()) as { mqtt: { username: string; password: string } };
    const basic = (u: string, p: string) => ({ authorization: `Basic ${Buffer.from(`${u}:${p}`).toString('base64')}` });
    // Nothing assigned yet: the device has no business with these weights.
    expect((await h.call('PUT', url, { body: weights, token: h.tokens.engineer })).status).toBe(201);
    const early = await h.call('GET', url, { token: null, headers: basic(mqtt.username, mqtt.password) });
    expect(early.status).toBe(403);
    expect(((await early.json()) as { issues: Array<{ path: string }> }).issues[0]!.path).toBe('query.sha256');
    await h.call('POST', '/api/v1/tasks', { body: task });
    expect((await h.call('POST', '/api/v1/profiles', { body: goodProfile })).status).toBe(201);
    const rel = await h.call('POST', '/api/v1/releases', {
      body: { deviceClassId: deviceClass.id, tasks: { count: { profileId: goodProfile.id, revision: 1 } }, defaultTask: 'count' },
      token: h.tokens.operator,
    });
    expect(rel.status).toBe(201);
    const { release } = (await rel.json()) as SignedRelease;
    expect((await h.call('POST', '/api/v1/devices/gh-07/assign', { body: { releaseId: release.id }, token: h.tokens.operator })).status).toBe(200);
    const ok = await h.call('GET', release.tasks.count!.model.weightsPath, { token: null, headers: basic(mqtt.username, mqtt.password) });
    expect(ok.status).toBe(200);
    expect(Buffer.from(await ok.arrayBuffer()).equals(weights)).toBe(true);
    // Another enrolled device, with no release of its own, still may not.
    const other = (await (await h.call('POST', '/api/v1/devices', { body: { id: 'gh-08', deviceClassId: deviceClass.id, tags: [] } })).json()) as { mqtt: { password: string } };
    expect((await h.call('GET', url, { token: null, headers: basic('gh-08', other.mqtt.password) })).status).toBe(403);
    const wrong = await h.call('GET', url, { token: null, headers: basic(mqtt.username, `${mqtt.password}x`) });
    expect(wrong.status).toBe(401);
    expect(wrong.headers.get('www-authenticate')).toContain('Basic');
    expect((await h.call('GET', url, { token: null })).status).toBe(401);
    // Basic credentials open the weights only, not the rest of the API.
    expect((await h.call('GET', '/api/v1/models', { token: null, headers: basic(mqtt.username, mqtt.password) })).status).toBe(401);
  });

  it('gives 404 for weights of a model version not uploaded yet', async () => {
    const v2 = { ...model, version: '2-demo', sha256: 'b'.repeat(64) };
    expect((await h.call('PUT', `/api/v1/models/${model.id}`, { body: v2 })).status).toBe(200);
    expect((await h.call('GET', url)).status).toBe(404);
    // The first version's weights stay reachable by hash, for devices still on an older release.
    expect((await h.call('GET', `${url}?sha256=${weightsSha256}`)).status).toBe(200);
  });
});
