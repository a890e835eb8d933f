/** The demo's shift schedule and summary line (demo data): pure pieces of the one-command demo. */
import { describe, expect, it } from 'vitest';
import { planRobots } from '../../src/demo/fleet.js';
import { GREENHOUSE_SHIFT, shiftLengthMin, stepAt } from '../../src/demo/shift.js';
import { formatSummary, summarizeRollout } from '../../src/demo/summary.js';

describe('greenhouse shift (demo data)', () => {
  it('is four rows of drive, count, inspect, then a low-light patrol: 66 shift minutes', () => {
    expect(GREENHOUSE_SHIFT.map((s) => s.task)).toEqual([
      ...Array.from({ length: 4 }, () => ['row-navigation', 'fruit-counting', 'leaf-inspection']).flat(),
      'low-light-patrol',
    ]);
    expect(shiftLengthMin(GREENHOUSE_SHIFT)).toBe(66);
    // Tasks done standing are the ones a when-idle release can be applied in.
    expect(GREENHOUSE_SHIFT.filter((s) => !s.moving).map((s) => s.task)).toEqual(Array.from({ length: 4 }, () => ['fruit-counting', 'leaf-inspection']).flat());
  });

  it('finds the step at a time, at step edges, and wraps into the next shift', () => {
    expect(stepAt(GREENHOUSE_SHIFT, 0)).toMatchObject({ index: 0, cycle: 0, step: { task: 'row-navigation' } });
    expect(stepAt(GREENHOUSE_SHIFT, 5.999)).toMatchObject({ index: 0 });
    expect(stepAt(GREENHOUSE_SHIFT, 6)).toMatchObject({ index: 1, step: { task: 'fruit-counting', moving: false } });
    expect(stepAt(GREENHOUSE_SHIFT, 56)).toMatchObject({ index: 12, step: { task: 'low-light-patrol', moving: true } });
    expect(stepAt(GREENHOUSE_SHIFT, 66 + 7)).toMatchObject({ index: 1, cycle: 1 });
    expect(stepAt(GREENHOUSE_SHIFT, -3)).toMatchObject({ index: 0, cycle: 0 });
  });

  it('refuses a schedule without steps or without length', () => {
    expect(() => stepAt([], 1)).toThrow(/at least one step/);
    expect(() => stepAt([{ task: 'x', moving: false, durationMin: 0, label: 'x' }], 1)).toThrow(/positive length/);
  });
});

describe('demo fleet and summary', () => {
  it('spreads robots over the two classes with ids, and efficiencies within a few percent of 1', () => {
    const robots = planRobots(5);
    expect(robots.map((r) => `${r.deviceId}:${r.demoClass.deviceClassId}`)).toEqual([
      'gh-a-01:gh-scout-a', 'gh-b-01:gh-scout-b', 'gh-a-02:gh-scout-a', 'gh-b-02:gh-scout-b', 'gh-a-03:gh-scout-a',
    ]);
    for (const r of planRobots(40)) expect(Math.abs(r.efficiency - 1)).toBeLessThanOrEqual(0.07);
  });

  it('prints one summary line', () => {
    const rollout = summarizeRollout({ id: 'ro-0a1b2c3d4e', status: 'running', currentWave: 2, waveCount: 3, devices: [{ status: 'passed' }, { status: 'applied' }, { status: 'waiting' }] });
    const line = formatSummary({ elapsedS: 72.4, robots: 12, robotsOnline: 11, switches: 318, releasesApplied: 14, eventsStored: 1432, eventsUnacked: 3, rollout });
    expect(line).toMatchInlineSnapshot(`"[demo 1:12] robots 11/12 online | switches 318 | releases applied 14 | rollout ro-0a1b2c3d4e running, wave 2/3, 1/3 robots passed | events stored 1432 (3 awaiting ack)"`);
    expect(formatSummary({ elapsedS: 5, robots: 1, robotsOnline: 1, switches: 0, releasesApplied: 0, eventsStored: 2, eventsUnacked: 0, rollout: null }, true)).toContain('[demo 0:05 final]');
  });
});
