/** GET /api/v1/devices/:id lists the device's drift episodes (newest first), open and cleared. Demo data. */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { DriftRecord } from '../../src/store/drift.js';
import { createHarness, deviceClass, removeDir, seedCatalog, tempDataDir, type Harness } from '../support/api-fixtures.js';

let h: Harness;
beforeAll(async () => {
  h = createHarness(tempDataDir());
  await seedCatalog(h, { profiles: [] });
  for (const id of ['gh-drift-01', 'gh-drift-02']) {
    const res = await h.call('POST', '/api/v1/devices', { body: { id, deviceClassId: deviceClass.id, tags: [] } });
    expect(res.status).toBe(201);
  }
});
afterAll(() => {
  h.closeStore();
  removeDir(h.dir);
});

describe("a device's drift episodes", () => {
  it('come with the device, newest first, cleared ones with their end; other devices stay out', async () => {
    const drift = h.store.drift;
    const common = { deviceId: 'gh-drift-01', deviceClassId: deviceClass.id, tolerance: 0.15 };
    // 1.30 ÷ 1.02 − 1 = 0.2745: beyond a 15 % tolerance (arithmetic).
    const latency = drift.onset({ ...common, quantity: 'latency', onsetAt: '2026-03-01T08:00:00.000Z', deviceFactor: 1.3, classFactor: 1.02, deviation: 1.3 / 1.02 - 1 });
    drift.clear(latency.id, '2026-03-01T09:30:00.000Z');
    drift.onset({ ...common, quantity: 'energy', onsetAt: '2026-03-01T10:00:00.000Z', deviceFactor: 0.8, classFactor: 1, deviation: -0.2 });
    drift.onset({ ...common, deviceId: 'gh-drift-02', quantity: 'latency', onsetAt: '2026-03-01T10:00:00.000Z', deviceFactor: 1.4, classFactor: 1, deviation: 0.4 });

    const res = await h.call('GET', '/api/v1/devices/gh-drift-01', { token: h.tokens.viewer });
    expect(res.status).toBe(200);
    const body = (await res.json()) as { drift: DriftRecord[] };
    expect(body.drift.map((d) => [d.quantity, d.clearedAt])).toEqual([
      ['energy', null],
      ['latency', '2026-03-01T09:30:00.000Z'],
    ]);
    expect(body.drift[1]!.deviation).toBeCloseTo(0.2745, 4);

    const quiet = (await (await h.call('GET', '/api/v1/devices/gh-drift-02')).json()) as { drift: DriftRecord[] };
    expect(quiet.drift.map((d) => d.deviceId)).toEqual(['gh-drift-02']);
  });
});
