import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { createHarness, deviceClass, model, network, removeDir, task, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
beforeEach(() => {
  h = createHarness(tempDataDir());
});
afterEach(() => {
  h.closeStore();
  removeDir(h.dir);
});

describe('versioned documents', () => {
  it('creates, reads, updates with history and lists the latest version', async () => {
    expect((await h.call('POST', '/api/v1/device-classes', { body: deviceClass })).status).toBe(201);
    const again = await h.call('POST', '/api/v1/device-classes', { body: deviceClass });
    expect(again.status).toBe(409);
    const changed = { ...deviceClass, name: 'Greenhouse test scout, relabelled (demo data)' };
    const put = await h.call('PUT', `/api/v1/device-classes/${deviceClass.id}`, { body: changed });
    expect(put.status).toBe(200);
    expect(((await put.json()) as { version: number }).version).toBe(2);
    const read = (await (await h.call('GET', `/api/v1/device-classes/${deviceClass.id}`)).json()) as { version: number; document: { name: string } };
    expect(read).toMatchObject({ version: 2, document: { name: changed.name } });
    const history = (await (await h.call('GET', `/api/v1/device-classes/${deviceClass.id}/history`)).json()) as Array<{ version: number; document: { name: string } }>;
    expect(history.map((v) => [v.version, v.document.name])).toEqual([
      [1, deviceClass.name],
      [2, changed.name],
    ]);
    const list = (await (await h.call('GET', '/api/v1/device-classes')).json()) as Array<{ id: string; version: number }>;
    expect(list.map((d) => [d.id, d.version])).toEqual([[deviceClass.id, 2]]);
  });

  it('records an audit row for each change, with the fields an update changed', async () => {
    await h.call('POST', '/api/v1/tasks', { body: task });
    await h.call('PUT', `/api/v1/tasks/${task.id}`, { body: { ...task, frameRateHz: 5 } });
    const audit = (await (await h.call('GET', `/api/v1/audit?target=task/${task.id}`)).json()) as Array<{ action: string; actor: string; detail: unknown }>;
    expect(audit.map((a) => a.action)).toEqual(['task.update', 'task.create']);
    expect(audit[0]!.detail).toEqual({ version: 2, changed: ['frameRateHz'] });
    expect(audit[0]!.actor).toMatch(/^test admin#\d+$/);
  });

  it('refuses a body whose id differs from the path, naming the field', async () => {
    await h.call('POST', '/api/v1/tasks', { body: task });
    const res = await h.call('PUT', `/api/v1/tasks/${task.id}`, { body: { ...task, id: 'other' } });
    expect(res.status).toBe(400);
    expect(((await res.json()) as { issues: Array<{ path: string }> }).issues[0]!.path).toBe('id');
  });

  it('gives 404 for PUT of a document that does not exist, and writes nothing', async () => {
    const res = await h.call('PUT', `/api/v1/tasks/${task.id}`, { body: task });
    expect(res.status).toBe(404);
    expect(h.store.documents.history('task', task.id)).toEqual([]);
  });

  it('needs an id to store a network, and a stored network before a model refers to it', async () => {
    const { id: _id, ...anonymous } = network;
    const noId = await h.call('POST', '/api/v1/networks', { body: anonymous });
    expect(noId.status).toBe(400);
    expect(((await noId.json()) as { issues: Array<{ path: string }> }).issues).toEqual([{ path: 'id', message: 'required' }]);
    const orphan = await h.call('POST', '/api/v1/models', { body: model });
    expect(orphan.status).toBe(400);
    expect(((await orphan.json()) as { issues: Array<{ path: string }> }).issues[0]!.path).toBe('networkId');
    expect(h.store.documents.list('model')).toEqual([]);
  });

  it('names each bad field of a document with its path', async () => {
    const bad = { ...deviceClass, lens: { ...deviceClass.lens, fNumberStops: [4, 2] }, sensor: { ...deviceClass.sensor, widthPx: -1 } };
    const res = await h.call('POST', '/api/v1/device-classes', { body: bad });
    expect(res.status).toBe(400);
    const body = (await res.json()) as { error: string; issues: Array<{ path: string; message: string }> };
    expect(body.issues.map((i) => i.path).sort()).toEqual(['lens.fNumberStops', 'sensor.widthPx']);
  });

  it('answers JSON that is not valid with 400 naming the body', async () => {
    const res = await h.call('POST', '/api/v1/tasks', { body: '{"id": ' });
    expect(res.status).toBe(400);
    // The 7-character body ends on line 1, so the problem is at its end: line 1, column 8.
    expect(((await res.json()) as { issues: Array<{ path: string }> }).issues[0]).toMatchObject({ path: 'body', line: 1, column: 8 });
  });

  it('names the line and column of a stray token in a multi-line body', async () => {
    const res = await h.call('POST', '/api/v1/tasks', { body: '{\n  "id": "weeding",\n  "name": ,\n}' });
    expect(res.status).toBe(400);
    expect(((await res.json()) as { issues: Array<{ path: string }> }).issues[0]).toMatchObject({ path: 'body', line: 3, column: 11 });
  });
});
