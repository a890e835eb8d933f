/** Pure helpers of the console's planner page, checked without a browser. Demo data. */
import { describe, expect, it } from 'vitest';
import { modelStyles } from '../../src/web/client/charts/front-plot.js';
import { OKABE_ITO } from '../../src/web/client/charts/scale.js';
import { focusDistanceM, focusText } from '../../src/web/client/format.js';
import { plannedProfile } from '../../src/web/client/planned-draft.js';
import { href, parsePlace } from '../../src/web/client/router.js';
import type { Candidate, Profile } from '../../src/api-client/response-types.js';

const base: Profile = {
  kind: 'profile',
  id: 'fruit-counting-a',
  name: 'Fruit counting on scout A',
  demoData: true,
  notes: 'Demo data. Focus at the harmonic mean of the range.',
  taskId: 'fruit-counting',
  deviceClassId: 'gh-scout-a',
  modelId: 'fruit-finder-a',
  camera: { focusDistanceM: 0.48, fNumber: 4, exposureUs: 2400, analogGain: 1 },
  memory: { weightBufferKib: 256, activationBufferKib: 1024 },
};

const candidate: Candidate = {
  modelId: 'row-guide-a',
  camera: { focusDistanceM: 0.48, fNumber: 2.8, exposureUs: 1131, analogGain: 2 },
  memory: { weightBufferKib: 1344, activationBufferKib: 704 },
  energyMjPerFrame: 0.16213,
  latencyMs: 13.604,
  predictedAccuracy: 0.93812,
  worstBlurPx: 5.5712,
};

describe('a planner candidate as the next revision of a profile', () => {
  it("takes the candidate's model, camera and memory split, and keeps the profile's identity", () => {
    const p = plannedProfile(base, candidate);
    expect(p).toMatchObject({ kind: 'profile', id: base.id, name: base.name, demoData: true, taskId: base.taskId, deviceClassId: base.deviceClassId });
    expect(p.modelId).toBe('row-guide-a');
    expect(p.camera).toEqual(candidate.camera);
    expect(p.memory).toEqual(candidate.memory);
    // A copy, not the candidate's own objects: editing the draft leaves the planner's answer as it was.
    expect(p.camera).not.toBe(candidate.camera);
  });

  it('says in its notes where the settings came from, with the figures to three significant digits', () => {
    expect(plannedProfile(base, candidate).notes).toMatchInlineSnapshot(
      `"Demo data. Settings from the planner: 0.162 mJ per frame, 13.6 ms latency, predicted accuracy 0.938, worst blur 5.57 px. Estimates: try on one unit in a safe state before a staged rollout."`,
    );
    const { demoData: _demo, ...real } = base;
    expect(plannedProfile(real, { ...candidate, predictedAccuracy: null }).notes).toContain('predicted accuracy not predicted');
    expect(plannedProfile(real, candidate).notes).not.toContain('Demo data');
  });
});

describe('planner links', () => {
  it('a task and device class survive a round trip through the hash', () => {
    const place = { page: 'planner', taskId: 'fruit-counting', deviceClassId: 'gh-scout-a' } as const;
    expect(href(place)).toBe('#/planner/fruit-counting/gh-scout-a');
    expect(parsePlace(href(place))).toEqual(place);
    expect(parsePlace('#/planner')).toEqual({ page: 'planner' });
    expect(href({ page: 'planner' })).toBe('#/planner');
  });
});

describe('marks of the front chart', () => {
  it('give each model its own Okabe & Ito colour and its own shape, the same model always the same', () => {
    const styles = modelStyles(['fruit-finder-a', 'row-guide-a', 'fruit-finder-a', 'leaf-check-a']);
    expect([...styles.keys()]).toEqual(['fruit-finder-a', 'row-guide-a', 'leaf-check-a']);
    const all = [...styles.values()];
    expect(new Set(all.map((s) => s.colour)).size).toBe(3);
    expect(new Set(all.map((s) => s.shape)).size).toBe(3);
    // Okabe & Ito (2008), "Color Universal Design": the palette the console draws meaning with.
    for (const s of all) expect(Object.values(OKABE_ITO)).toContain(s.colour);
  });
});

// Three significant figures: rounding to significant figures as in NIST SP 811 (2008), section 7.9 — common
// practice for how precisely a quantity is stated; a lens is not set to focus finer than about a millimetre (from memory).
describe('the focus distance a person sees', () => {
  it('rounds to three significant figures in metres, the value staying a number of metres', () => {
    expect(focusDistanceM(5 / 3)).toBe(1.67);
    expect(focusDistanceM(0.48)).toBe(0.48);
    expect(focusDistanceM(0.123456)).toBe(0.123);
    expect(focusDistanceM(12.345)).toBe(12.3);
    expect(focusDistanceM(0)).toBe(0);
    expect(focusText(5 / 3)).toBe('1.67 m');
    expect(focusText(0.3)).toBe('0.3 m');
    expect(focusText(null)).toBe('—');
  });

  it('hands a planner candidate to the editor with its focus rounded, and says so in the notes', () => {
    const odd: Candidate = { ...candidate, camera: { ...candidate.camera, focusDistanceM: 5 / 3 } };
    const p = plannedProfile(base, odd);
    expect(p.camera.focusDistanceM).toBe(1.67);
    expect(p.camera.fNumber).toBe(odd.camera.fNumber);
    expect(odd.camera.focusDistanceM).toBe(5 / 3);
    expect(p.notes).toContain("Focus 1.67 m (the planner's 1.6667 m, rounded).");
    expect(plannedProfile(base, candidate).notes).not.toContain('rounded');
  });
});

