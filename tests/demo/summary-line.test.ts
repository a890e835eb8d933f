import { describe, expect, it } from 'vitest';
import { describeWaves } from '../../src/demo/run-demo.js';
import { formatRollout, formatSummary } from '../../src/demo/summary.js';

describe('the demo summary says when the rollout comes and how its waves are planned', () => {
  it('before the rollout starts, the line gives its demo time', () => {
    expect(formatRollout(null, 120)).toBe('rollout starts at demo 2:00');
    expect(formatRollout(null)).toBe('rollout not started');
    const line = formatSummary({ elapsedS: 31, robots: 2, robotsOnline: 2, switches: 4, releasesApplied: 2, eventsStored: 40, eventsUnacked: 0, rollout: null, rolloutStartsAtS: 120 });
    expect(line).toBe('[demo 0:31] robots 2/2 online | switches 4 | releases applied 2 | rollout starts at demo 2:00 | events stored 40 (0 awaiting ack)');
  });

  it('waves are described as planned: one wave for a single target robot, three for six', () => {
    expect(describeWaves([{ devices: 1 }])).toBe('1 wave: 1 robot');
    expect(describeWaves([{ devices: 1 }, { devices: 1 }, { devices: 4 }])).toBe('3 waves: 1 robot, then 1, then 4');
  });
});
