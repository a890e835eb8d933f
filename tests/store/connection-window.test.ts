import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Store } from '../../src/store/index.js';
import { tempDir } from '../support/agent-fixtures.js';
import { openTestStore } from '../support/store-backend.js';

// A history window reads a device's connection changes in one statement: the last change before the window
// and those inside it. It must equal the two separate reads it replaces (a brute-force check, common practice).
const dir = tempDir('connection-window');
let store: Store;
const START_MS = Date.parse('2025-05-10T04:00:00.000Z');
const times: string[] = [];

beforeAll(() => {
  store = openTestStore(dir.path);
  store.transaction(() => {
    for (let i = 0; i < 60; i++) {
      // Two changes in the same millisecond now and then (ordered by id), uneven gaps otherwise.
      const at = new Date(START_MS + Math.floor(i / 2) * 1_800_000 + (i % 2 === 0 ? 0 : (i % 3) * 1000)).toISOString();
      times.push(at);
      store.deviceConnections.insert({ deviceId: 'gh-conn-01', at, online: i % 2 === 1, cause: i % 2 === 1 ? 'connected' : 'keepalive-missed', releaseId: null, task: i % 4 === 0 ? 'rows' : null });
    }
    store.deviceConnections.insert({ deviceId: 'gh-conn-02', at: times[10]!, online: true, cause: 'connected', releaseId: null, task: null });
  });
});

afterAll(() => {
  store.close();
  dir.remove();
});

describe("one read of a device's connection changes for a window", () => {
  it('equals lastBefore(from) and between(from, to) for windows before, across, on and after the changes', () => {
    const c = store.deviceConnections;
    const edges = [new Date(START_MS - 3_600_000).toISOString(), ...times, new Date(START_MS + 40 * 3_600_000).toISOString()];
    let checked = 0;
    for (let i = 0; i < edges.length; i += 3) {
      for (let j = i; j < edges.length; j += 7) {
        const from = edges[i]!;
        const to = edges[j]!;
        const got = c.window('gh-conn-01', from, to);
        expect(got.before).toEqual(c.lastBefore('gh-conn-01', from));
        expect(got.changes).toEqual(c.between('gh-conn-01', from, to));
        checked += 1;
      }
    }
    expect(checked).toBeGreaterThan(50);
    const all = c.window('gh-conn-01', edges[0]!, edges.at(-1)!);
    expect(all.before).toBeNull();
    expect(all.changes).toHaveLength(60);
    expect(c.window('gh-conn-01', edges.at(-1)!, edges.at(-1)!).before?.at).toBe(times.at(-1));
    expect(c.window('nobody', edges[0]!, edges.at(-1)!)).toEqual({ before: null, changes: [] });
  });
});
