import { describe, expect, it } from 'vitest';
import { focusCodeFor, interpolateCode } from '../../src/physics/control-calibration.js';
import { cameraControlsSchema, parseWith } from '../../src/schema/index.js';

// Lens extension beyond f for a thin lens focused at d: v − f = f²/(d − f) (Gaussian lens equation,
// Hecht, Optics, 5th ed., §5.2). A voice-coil or stepper focus code is proportional to the extension.
const f = 0.006;
const extensionUm = (d: number) => (d === Infinity ? 0 : ((f * f) / (d - f)) * 1e6);

describe('focus calibration table', () => {
  // Demo data: a 6 mm module measured at infinity, 1 m and 0.1 m, one code per µm of lens extension.
  const dioptreTable = { unit: 'dioptre' as const, points: [{ at: 0, code: 0 }, { at: 1, code: Math.round(extensionUm(1)) }, { at: 10, code: Math.round(extensionUm(0.1)) }] };

  it('interpolated in dioptres, 0.5 m lands within 3 % of the thin-lens extension (Hecht, Optics, §5.2); linear in metres would be off threefold', () => {
    const r = focusCodeFor(dioptreTable, 0.5);
    expect(r.ok).toBe(true);
    const truth = extensionUm(0.5); // 72.9 µm
    expect(r.ok && Math.abs(r.code - truth) / truth).toBeLessThan(0.03);
    // The same three points interpolated linearly in metres between 1 m and 0.1 m would give about 229 µm.
    const inMetres = interpolateCode([{ at: 0.1, code: 383 }, { at: 1, code: 36 }], 0.5, 'focus');
    expect(inMetres.ok && inMetres.code / truth).toBeGreaterThan(3);
  });

  it('a table in metres gives the same codes as the same table in dioptres', () => {
    const metres = { unit: 'm' as const, points: [{ at: 1, code: 36 }, { at: 0.1, code: 383 }, { at: 0.5, code: 73 }] };
    const dioptres = { unit: 'dioptre' as const, points: [{ at: 1, code: 36 }, { at: 10, code: 383 }, { at: 2, code: 73 }] };
    for (const d of [0.1, 0.2, 0.33, 0.5, 0.8, 1]) expect(focusCodeFor(metres, d)).toEqual(focusCodeFor(dioptres, d));
  });

  it('hits measured points exactly and refuses to extrapolate beyond them', () => {
    expect(focusCodeFor(dioptreTable, 1)).toEqual({ ok: true, code: 36 });
    expect(focusCodeFor(dioptreTable, 0.08)).toEqual({ ok: false, reason: 'focus 0.08 m (12.5 dioptres) is outside the calibrated range 0 to 10 dioptres' });
    expect(focusCodeFor({ unit: 'm', points: [{ at: 0.2, code: 100 }, { at: 2, code: 10 }] }, 5)).toEqual({
      ok: false, reason: 'focus 5 m (0.2 dioptres) is outside the calibrated range 0.2 m to 2 m',
    });
  });

  it('checks tables: at least two points, no repeats, codes strictly one way, each problem at its field path', () => {
    const issues = (controls: unknown) => {
      const r = parseWith(cameraControlsSchema, controls);
      return r.ok ? [] : r.issues;
    };
    expect(issues({ focus: { unit: 'dioptre', points: [{ at: 0, code: 0 }] } })).toEqual([
      { path: 'focus.points', message: 'needs at least two measured points (focus in dioptres and its focus code)' },
    ]);
    expect(issues({ focus: { unit: 'dioptre', points: [{ at: 0, code: 0 }, { at: 2, code: 50 }, { at: 5, code: 40 }] } })).toEqual([
      { path: 'focus.points[2].code', message: "code 40 at 5 breaks the table's rising order (point 1 has code 50 at 2); codes must change strictly one way" },
    ]);
    expect(issues({ focus: { unit: 'm', points: [{ at: 0.5, code: 0 }, { at: 0.5, code: 9 }] } })).toEqual([
      { path: 'focus.points[1].at', message: 'repeats 0.5, already measured at point 0' },
    ]);
    expect(issues({ focus: { unit: 'm', points: [{ at: 0, code: 0 }, { at: 1, code: 9 }] } })[0]).toEqual({ path: 'focus.points[0].at', message: 'must be greater than 0' });
    expect(issues({ gain: { points: [{ at: 0.5, code: 0 }, { at: 2, code: 9.5 }] } })).toEqual([
      { path: 'gain.points[0].at', message: 'must be at least 1 (unity gain)' },
      { path: 'gain.points[1].code', message: 'must be an integer control code' },
    ]);
    expect(issues({ focus: { points: [] } })[0]!.path).toBe('focus.unit');
  });
});
