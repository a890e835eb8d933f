/**
 * Recording a rollout's assignments in batches: one transaction per batch, an item whose own bookkeeping
 * throws left out alone (its savepoint), each release parsed once, and sending that stops when an operator
 * pauses the rollout between batches. Real SQLite in a temporary folder (demo data: greenhouse row cameras).
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { recordAssignments, type ParsedReleases } from '../../src/fleet/rollout/assign.js';
import { createAssignmentDispatcher } from '../../src/fleet/rollout/dispatch.js';
import type { SignedReleaseText } from '../../src/protocol/release.js';
import { openStore, type Store } from '../../src/store/index.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, sign, tempDir } from '../support/agent-fixtures.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

const tasks = { rows: demoTask('rows-net', demoWeights('batch rows-net'), 0.5, 4) };
let dir: { path: string; remove(): void };
let store: Store;
const at = '2025-03-01T06:00:00.000Z';

beforeEach(() => {
  dir = tempDir('assign-batch');
  store = openStore(dir.path);
  store.releases.insert({ id: 'gh-batch-1', deviceClassId: demoDeviceClass.id, version: 1, createdAt: at, createdBy: 'test (demo data)', signed: sign(demoRelease('gh-batch-1', 1, tasks)) });
  for (const id of ['gh-b-01', 'gh-b-02', 'gh-b-03']) store.devices.enrol({ id, deviceClassId: demoDeviceClass.id, tags: [], actor: 'test', at });
});
afterEach(() => {
  store.close();
  dir.remove();
});

const input = (deviceId: string, withinTransaction?: () => void) => ({
  deviceId, releaseId: 'gh-batch-1', actor: 'test operator', cause: 'rollout:test', at, ...(withinTransaction ? { withinTransaction } : {}),
});
const assignedIds = () => sqliteHandle(store).prepare('SELECT device_id FROM assignments ORDER BY device_id').pluck().all();

describe('batched assignment records', () => {
  it('leaves out alone an item whose bookkeeping throws; the others land, with their audit entries', () => {
    const results = recordAssignments(store, [
      input('gh-b-01'),
      input('gh-b-02', () => {
        throw new Error('already moved');
      }),
      input('gh-b-03'),
      input('gh-b-99'),
    ]);
    expect(results.map((r) => (r.ok ? 'ok' : r.code))).toEqual(['ok', 'not-recorded', 'ok', 'device-not-found']);
    expect(assignedIds()).toEqual(['gh-b-01', 'gh-b-03']);
    expect(store.devices.get('gh-b-02')!.assignedReleaseId).toBe(null);
    expect(store.audit.query({ action: 'device.assign' }).map((e) => e.target).sort()).toEqual(['device/gh-b-01', 'device/gh-b-03']);
  });

  it('parses a release once for all its items and, given the same cache, across batches', () => {
    const parsed: ParsedReleases = new Map();
    const first = recordAssignments(store, [input('gh-b-01'), input('gh-b-02')], parsed);
    const second = recordAssignments(store, [input('gh-b-03')], parsed);
    const releases = [...first, ...second].map((r) => (r.ok ? r.release : null));
    expect(releases[0]).not.toBe(null);
    expect(releases.every((r) => r === releases[0])).toBe(true);
  });

  it('stops sending a wave when the rollout is paused between batches; what was recorded was sent', async () => {
    const repo = store.rollouts;
    const sent: string[] = [];
    /** Stands in for the bus: records what would be published, and the operator pauses after the first send. */
    const publisher = {
      async publishRelease(deviceId: string, _release: SignedReleaseText) {
        sent.push(deviceId);
        repo.setStatus('ro-batch', 'paused', at, { kind: 'operator', by: 'test operator', at });
      },
    };
    const r = repo.insert({
      id: 'ro-batch', releaseId: 'gh-batch-1', deviceClassId: demoDeviceClass.id, spec: {}, waveCount: 1, createdAt: at, createdBy: 'test operator',
      devices: ['gh-b-01', 'gh-b-02', 'gh-b-03'].map((deviceId) => ({ deviceId, wave: 0 })),
    });
    const dispatcher = createAssignmentDispatcher({ store, publisher, repo, ranges: store.eventRanges, batchSize: 1, maxSendsInFlight: 10, log: () => {}, nowMs: () => performance.now() });
    await dispatcher.dispatch(r, repo.devices(r.id), false, at);
    await dispatcher.settled();
    expect(sent).toEqual(['gh-b-01']);
    expect(repo.devices(r.id).map((d) => d.status)).toEqual(['assigned', 'waiting', 'waiting']);
    expect(assignedIds()).toEqual(['gh-b-01']);
  });
});
