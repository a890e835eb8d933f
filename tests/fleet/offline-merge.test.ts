import { describe, expect, it } from 'vitest';
import type { HistoryInterval } from '../../src/fleet/history/intervals.js';
import { offlinePeriods, withOffline } from '../../src/fleet/history/offline.js';
import type { ConnectionChange } from '../../src/store/device-connections.js';

// Demo data: one greenhouse robot on 2026-03-01, times in minutes after 08:00 UTC.
const at = (min: number) => new Date(Date.UTC(2026, 2, 1, 8, min)).toISOString();
const ms = (min: number) => Date.parse(at(min));
const change = (id: number, min: number, online: boolean, cause: ConnectionChange['cause']): ConnectionChange => ({
  deviceId: 'gh-a-01', id, at: at(min), online, cause, releaseId: 'gh-scout-a-v1', task: 'row-navigation',
});
const rows = (start: number, end: number | null, seq = 1): HistoryInterval => ({
  kind: 'profile', deviceId: 'gh-a-01', task: 'row-navigation', profileId: 'row-navigation-a', profileRevision: 1, releaseId: 'gh-scout-a-v1',
  start: at(start), end: end === null ? null : at(end), reason: 'local', seq, cause: { releaseId: 'gh-scout-a-v1' }, reported: 'live',
});

describe('profile intervals merged with offline periods', () => {
  it('periods pair each going offline with the next coming back; repeats change nothing', () => {
    const p = offlinePeriods(null, [change(1, 0, true, 'connected'), change(2, 10, false, 'last-will'), change(3, 11, false, 'last-will'), change(4, 20, true, 'reconnected'), change(5, 30, false, 'keepalive-missed')]);
    expect(p.map((x) => [x.startMs, x.endMs, x.cause])).toEqual([[ms(10), ms(20), 'last-will'], [ms(30), null, 'keepalive-missed']]);
  });

  it('a period begun before the window is clipped to it, and one still open has no end while the window reaches now', () => {
    const periods = offlinePeriods(change(2, 5, false, 'found-offline'), []);
    const out = withOffline('gh-a-01', [rows(10, null)], periods.map((period) => ({ period, runs: [] })), { fromMs: ms(10), toMs: ms(40), nowMs: ms(40) });
    // No event accounts for the stretch: the profile interval is gone, replaced by one offline interval from the window's start.
    expect(out).toHaveLength(1);
    expect(out[0]).toMatchObject({ kind: 'offline', start: at(10), end: null, reason: 'found-offline', lastKnownTask: 'row-navigation', task: null });
  });

  it('a run reported after the fact keeps its profile and splits at the moment the link went; the rest of the period is offline', () => {
    const [period] = offlinePeriods(null, [change(1, 10, false, 'last-will'), change(2, 20, true, 'reconnected')]);
    const out = withOffline('gh-a-01', [rows(0, null)], [{ period: period!, runs: [{ startMs: ms(10), endMs: ms(15) }] }], { fromMs: ms(0), toMs: ms(30), nowMs: ms(30) });
    expect(out.map((i) => [i.kind, i.reported, i.start, i.end])).toEqual([
      ['profile', 'live', at(0), at(10)],
      ['profile', 'after-the-fact', at(10), at(15)],
      ['offline', 'live', at(15), at(20)],
      ['profile', 'live', at(20), null],
    ]);
  });

  it('a window that ends before now closes every interval at its end', () => {
    const [period] = offlinePeriods(null, [change(1, 10, false, 'clean-disconnect')]);
    const out = withOffline('gh-a-01', [rows(0, null)], [{ period: period!, runs: [] }], { fromMs: ms(0), toMs: ms(20), nowMs: ms(60) });
    expect(out.map((i) => [i.kind, i.start, i.end])).toEqual([['profile', at(0), at(10)], ['offline', at(10), at(20)]]);
  });
});
