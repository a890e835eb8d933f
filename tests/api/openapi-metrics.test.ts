import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ROUTES } from '../../src/api/index.js';
import { createHarness, removeDir, seedCatalog, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
beforeAll(async () => {
  h = createHarness(tempDataDir());
  await seedCatalog(h);
});
afterAll(() => {
  h.closeStore();
  removeDir(h.dir);
});

describe('OpenAPI document', () => {
  it('lists every route of the table with its access rule and the request schema generated from zod', async () => {
    const res = await h.call('GET', '/api/v1/openapi.json', { token: null });
    expect(res.status).toBe(200);
    const doc = (await res.json()) as { openapi: string; paths: Record<string, Record<string, any>> };
    expect(doc.openapi).toBe('3.0.3');
    for (const r of ROUTES) {
      const op = doc.paths[r.path.replace(/:([a-z]+)/g, '{$1}')]?.[r.method];
      expect(op, r.key).toBeDefined();
      expect(op['x-ocellus-access']).toBe(r.access);
    }
    const create = doc.paths['/api/v1/device-classes']!.post;
    const schema = create.requestBody.content['application/json'].schema;
    expect(schema.required).toEqual(expect.arrayContaining(['id', 'lens', 'sensor', 'accelerator']));
    expect(schema.properties.lens.properties.focalLengthMm.type).toBe('number');
    const release = doc.paths['/api/v1/releases']!.post.requestBody.content['application/json'].schema;
    expect(release.properties.applyPolicy.enum).toEqual(['immediate', 'when-idle']);
    const weights = doc.paths['/api/v1/models/{id}/weights']!;
    expect(weights.put.requestBody.content['application/octet-stream']).toBeDefined();
    expect(weights.get.security).toEqual([{ bearer: [] }, { deviceBasic: [] }]);
  });
});

describe('metrics', () => {
  it('counts requests by route pattern and status in the Prometheus text format', async () => {
    await h.call('GET', '/api/v1/tasks');
    await h.call('GET', '/api/v1/tasks/no-such-task');
    await h.call('GET', '/api/v1/tasks', { token: null });
    const res = await h.call('GET', '/metrics', { token: h.tokens.viewer });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toContain('text/plain; version=0.0.4');
    const text = await res.text();
    expect(text).toContain('# TYPE ocellus_http_requests_total counter');
    expect(text).toMatch(/ocellus_http_requests_total\{method="GET",route="\/api\/v1\/tasks",status="200"\} [1-9]/);
    expect(text).toMatch(/ocellus_http_requests_total\{method="GET",route="\/api\/v1\/tasks\/:id",status="404"\} 1/);
    expect(text).toMatch(/ocellus_http_requests_total\{method="GET",route="\/api\/v1\/tasks",status="401"\} 1/);
    expect(text).toMatch(/ocellus_http_request_duration_seconds_bucket\{le="\+Inf",method="GET",route="\/api\/v1\/tasks",status="200"\} [1-9]/);
    expect(text).toContain('# TYPE ocellus_mqtt_rejects_total counter');
    expect(text).toContain('# TYPE ocellus_devices_online gauge');
  });

  it('shows a counter the bus increments through the shared registry', async () => {
    h.metrics.counter('ocellus_mqtt_rejects_total', 'MQTT connections and messages the broker or bridge refused').inc({ reason: 'bad-password' });
    const text = await (await h.call('GET', '/metrics')).text();
    expect(text).toContain('ocellus_mqtt_rejects_total{reason="bad-password"} 1');
  });
});
