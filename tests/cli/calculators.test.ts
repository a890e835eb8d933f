import { describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';

const repo = new URL('../..', import.meta.url).pathname;

async function ocellus(...args: string[]) {
  const io = captureIo(repo);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err(), json: () => JSON.parse(io.out()) as Record<string, any> };
}

describe('ocellus optics', () => {
  const lens = ['--focal-length-mm', '50', '--f-number', '8', '--coc-mm', '0.03'];

  it('50 mm f/8 c = 0.03 mm: hyperfocal 10.467 m; focused there, near H/2 and far infinite (null) (REFERENCES.md worked example; Greenleaf 1950)', async () => {
    const r = await ocellus('optics', ...lens, '--focus-m', String(10.4666667), '--json');
    expect(r.code).toBe(0);
    const j = r.json();
    expect(Object.keys(j).sort()).toEqual(['airy_diameter_um', 'at', 'far_m', 'hyperfocal_m', 'mtf_cutoff_cyc_per_mm', 'near_m']);
    expect(j.hyperfocal_m).toBeCloseTo(10.467, 3);
    expect(j.near_m).toBeCloseTo(10.467 / 2, 3);
    expect(j.far_m).toBeNull();
  });

  it('Airy disk 2.44·λ·N = 10.7 µm and MTF cutoff 1/(λN) = 227 cycles/mm at 550 nm, f/8 (REFERENCES.md)', async () => {
    const j = (await ocellus('optics', ...lens, '--focus-m', '5', '--json')).json();
    expect(j.airy_diameter_um).toBeCloseTo(10.736, 3);
    expect(j.mtf_cutoff_cyc_per_mm).toBeCloseTo(227.27, 2);
  });

  it('focused at 5 m the far limit is s(H−f)/(H−s) = 9.53 m and blur circles follow b = (|d−s|/d)·f²/(N(s−f)) (REFERENCES.md)', async () => {
    const j = (await ocellus('optics', ...lens, '--focus-m', '5', '--at-m', '2', '--at-m', '5', '--json')).json();
    const h = 2500 / (8 * 0.03) + 50;
    expect(j.near_m).toBeCloseTo((5000 * (h - 50)) / (h + 5000 - 100) / 1000, 6);
    expect(j.far_m).toBeCloseTo((5000 * (h - 50)) / (h - 5000) / 1000, 6);
    expect(j.at).toEqual([
      { distance_m: 2, blur_circle_mm: expect.closeTo(((3000 / 2000) * 2500) / (8 * 4950), 9) },
      { distance_m: 5, blur_circle_mm: 0 },
    ]);
  });

  it('human-readable output names each figure with its unit', async () => {
    const r = await ocellus('optics', ...lens, '--focus-m', '5');
    expect(r.out).toContain('hyperfocal distance');
    expect(r.out).toContain('10.47 m');
  });

  it.each([
    [['--f-number', '8', '--focus-m', '5', '--coc-mm', '0.03'], 'missing --focal-length-mm'],
    [[...lens, '--focus-m', 'NaN'], "--focus-m must be a finite number, got 'NaN'"],
    [[...lens, '--focus-m', 'abc'], "--focus-m must be a finite number, got 'abc'"],
    [['--focal-length-mm', '50', '--f-number=-2', '--coc-mm', '0.03', '--focus-m', '5'], '--f-number must be greater than 0, got -2'],
    [[...lens, '--focus-m', '0.01'], '--focus-m 0.01 m must be beyond the focal length'],
    [[...lens, '--focus-m', '5', '--at-m', '0'], '--at-m must be greater than 0'],
    [[...lens, '--focus-m', '5', '--bogus'], "Unknown option '--bogus'"],
  ])('bad input %j exits 2 naming the flag', async (args, message) => {
    const r = await ocellus('optics', ...args);
    expect(r.code).toBe(2);
    expect(r.err).toContain(message);
    expect(r.out).toBe('');
  });
});

describe('ocellus exposure', () => {
  it('meter equation N²/t = L·S/K: 400 cd/m² at ISO 100, K = 12.5 → N²/t = 3200, so f/8 needs 0.02 s; EV = log2(3200) = 11.64 (ISO 2720, REFERENCES.md)', async () => {
    const r = await ocellus('exposure', '--luminance-cd-m2', '400', '--f-number', '8', '--exposure-s', '0.02', '--iso', '100', '--json');
    expect(r.code).toBe(0);
    const j = r.json();
    expect(Object.keys(j).sort()).toEqual(['ev', 'ev100', 'focal_plane_exposure_lx_s', 'metered_exposure_s']);
    expect(j.ev).toBeCloseTo(Math.log2(3200), 9);
    expect(j.ev100).toBeCloseTo(Math.log2(3200), 9);
    expect(j.metered_exposure_s).toBeCloseTo(0.02, 12);
    // H = q·L·t/N² with q = (π/4)·0.9·0.98·cos⁴10° ≈ 0.65 (ISO 12232): 0.6516·400·0.02/64 = 0.08145 lx·s.
    expect(j.focal_plane_exposure_lx_s).toBeCloseTo(0.08145, 4);
  });

  it('EV100 = EV − log2(S/100): one stop lower at ISO 200 (ISO 2720)', async () => {
    const j = (await ocellus('exposure', '--luminance-cd-m2', '400', '--f-number', '8', '--exposure-s', '0.02', '--iso', '200', '--json')).json();
    expect(j.ev100).toBeCloseTo(Math.log2(3200) - 1, 9);
  });

  it.each([
    [['--f-number', '8', '--exposure-s', '0.02', '--iso', '100'], 'missing --luminance-cd-m2'],
    [['--luminance-cd-m2', '400', '--f-number', '8', '--exposure-s', '0.02', '--iso', '0'], '--iso must be greater than 0, got 0'],
    [['--luminance-cd-m2', '400', '--f-number', '8', '--exposure-s', 'Infinity', '--iso', '100'], "--exposure-s must be a finite number, got 'Infinity'"],
    [['--luminance-cd-m2=-5', '--f-number', '8', '--exposure-s', '0.02', '--iso', '100'], '--luminance-cd-m2 must be greater than 0'],
  ])('bad input %j exits 2 naming the flag', async (args, message) => {
    const r = await ocellus('exposure', ...args);
    expect(r.code).toBe(2);
    expect(r.err).toContain(message);
  });
});

describe('ocellus photons', () => {
  const base = ['--pixel-pitch-um', '1', '--exposure-ms', '1', '--wavelength-nm', '1000', '--qe', '0.5', '--dark-noise-e', '2', '--gain-dn-per-e', '1'];

  it('1 µm², 1 ms, 1 µm, 1 µW/cm² gives 50.34 photons (EMVA 1288 3.1 constant, REFERENCES.md)', async () => {
    const r = await ocellus('photons', '--irradiance-uw-cm2', '1', ...base, '--json');
    expect(r.code).toBe(0);
    const j = r.json();
    expect(Object.keys(j).sort()).toEqual(['electrons', 'photons', 'saturated', 'snr', 'snr_db']);
    expect(j.photons).toBeCloseTo(50.34, 2);
    expect(j.electrons).toBeCloseTo(0.5 * j.photons, 9);
    // SNR = μe/√(σd² + σq²/K² + μe) with σq² = 1/12 DN² (EMVA 1288 3.1).
    const snr = j.electrons / Math.sqrt(4 + 1 / 12 + j.electrons);
    expect(j.snr).toBeCloseTo(snr, 9);
    expect(j.snr_db).toBeCloseTo(20 * Math.log10(snr), 9);
    expect(j.saturated).toBe(false);
  });

  it('scales linearly: 100 µW/cm² on a 3 µm pixel for 10 ms at 550 nm is 50.34·9·10·0.55·100 photons', async () => {
    const j = (await ocellus('photons', '--irradiance-uw-cm2', '100', '--pixel-pitch-um', '3', '--exposure-ms', '10', '--wavelength-nm', '550', '--qe', '0.6', '--dark-noise-e', '3', '--gain-dn-per-e', '0.5', '--json')).json();
    expect(j.photons / (50.34 * 9 * 10 * 0.55 * 100)).toBeCloseTo(1, 3);
  });

  it('clips at the full well when one is given', async () => {
    const j = (await ocellus('photons', '--irradiance-uw-cm2', '1000', ...base, '--full-well-e', '1000', '--bit-depth', '16', '--json')).json();
    expect(j.saturated).toBe(true);
    expect(j.electrons).toBe(1000);
  });

  it.each([
    [base, 'missing --irradiance-uw-cm2'],
    [['--irradiance-uw-cm2', '1', ...base.slice(0, 6), '--qe', '1.5', ...base.slice(8)], '--qe must be a fraction between 0 and 1'],
    [['--irradiance-uw-cm2', 'NaN', ...base], "--irradiance-uw-cm2 must be a finite number, got 'NaN'"],
    [['--irradiance-uw-cm2=-1', ...base], '--irradiance-uw-cm2 must be 0 or more'],
    [['--irradiance-uw-cm2', '1', ...base, '--bit-depth', '10.5'], '--bit-depth must be a whole number'],
  ])('bad input %j exits 2 naming the flag', async (args, message) => {
    const r = await ocellus('photons', ...args);
    expect(r.code).toBe(2);
    expect(r.err).toContain(message);
  });
});

describe('ocellus schema and help', () => {
  it('prints the JSON Schema of a kind', async () => {
    const r = await ocellus('schema', 'task');
    expect(r.code).toBe(0);
    const j = r.json();
    expect(j.$schema).toContain('2020-12');
    expect(Object.keys(j.properties)).toContain('nearDistanceM');
  });
  it('an unknown kind exits 2 and lists the kinds', async () => {
    const r = await ocellus('schema', 'lens');
    expect(r.code).toBe(2);
    expect(r.err).toContain("unknown kind 'lens': must be one of device-class, network, model, task, profile");
  });
  it('no kind exits 2', async () => {
    expect((await ocellus('schema')).code).toBe(2);
  });
  it('help lists every command and exits 0; an unknown command exits 2', async () => {
    const help = await ocellus('help');
    expect(help.code).toBe(0);
    for (const name of ['check', 'cost', 'optics', 'exposure', 'photons', 'schema']) expect(help.out).toContain(`  ${name}`);
    expect((await ocellus('--help')).code).toBe(0);
    const one = await ocellus('help', 'optics');
    expect(one.out).toContain('usage: ocellus optics');
    const unknown = await ocellus('frobnicate');
    expect(unknown.code).toBe(2);
    expect(unknown.err).toContain("unknown command 'frobnicate'");
    expect((await ocellus()).code).toBe(2);
  });
});

describe('ocellus mtf', () => {
  const base = ['--f-number', '8', '--wavelength-nm', '550', '--pixel-pitch-um', '3'];

  it('answers with the documented keys; at half the cutoff the diffraction MTF is 0.3910 (Goodman eq. 6-32), and the system is the product', async () => {
    const r = await ocellus('mtf', ...base, '--at-cyc-per-mm', String(1 / (2 * 550e-6 * 8)), '--json');
    expect(r.code).toBe(0);
    const j = r.json();
    expect(Object.keys(j).sort()).toEqual(['at', 'cutoff_cyc_per_mm', 'equivalent_blur_px', 'mtf50_cyc_per_mm', 'nyquist_cyc_per_mm', 'working_f_number']);
    expect(Object.keys(j.at[0]).sort()).toEqual(['cyc_per_mm', 'defocus', 'diffraction', 'motion', 'pixel', 'system']);
    expect(j.cutoff_cyc_per_mm).toBeCloseTo(227.27, 2);
    expect(j.at[0].diffraction).toBeCloseTo(0.391, 4);
    expect(j.at[0].system).toBeCloseTo(j.at[0].diffraction * j.at[0].defocus * j.at[0].pixel * j.at[0].motion, 12);
  });

  it('by default reports half Nyquist and Nyquist; one pixel of motion passes 2/π at Nyquist (Boreman §2.5)', async () => {
    const j = (await ocellus('mtf', ...base, '--motion-px', '1', '--json')).json();
    expect(j.at.map((a: { cyc_per_mm: number }) => a.cyc_per_mm)).toEqual([j.nyquist_cyc_per_mm / 2, j.nyquist_cyc_per_mm]);
    expect(j.at[1].motion).toBeCloseTo(2 / Math.PI, 12);
    expect(j.at[1].pixel).toBeCloseTo(2 / Math.PI, 12);
  });

  it('at 1:1 magnification the working f-number doubles and the cutoff halves (N_w = N(1 + m))', async () => {
    const j = (await ocellus('mtf', ...base, '--magnification', '1', '--json')).json();
    expect(j.working_f_number).toBe(16);
    expect(j.cutoff_cyc_per_mm).toBeCloseTo(227.27 / 2, 2);
  });

  it('more defocus gives a larger equivalent blur and a lower MTF50', async () => {
    const sharp = (await ocellus('mtf', ...base, '--json')).json();
    const soft = (await ocellus('mtf', ...base, '--defocus-blur-um', '20', '--json')).json();
    expect(soft.equivalent_blur_px).toBeGreaterThan(sharp.equivalent_blur_px);
    expect(soft.mtf50_cyc_per_mm).toBeLessThan(sharp.mtf50_cyc_per_mm);
  });

  it('prints a table for people', async () => {
    const r = await ocellus('mtf', ...base);
    expect(r.out).toMatch(/MTF50\s+\d/);
    expect(r.out).toMatch(/cycles\/mm\s+diffraction\s+defocus\s+pixel\s+motion\s+system/);
  });

  it('bad input exits 2 naming the flag', async () => {
    for (const [args, flag] of [
      [['--wavelength-nm', '550', '--pixel-pitch-um', '3'], 'f-number'],
      [[...base, '--fill-factor', '1.5'], 'fill-factor'],
      [[...base, '--fill-factor', '0'], 'fill-factor'],
      [[...base, '--defocus-blur-um', '-1'], 'defocus-blur-um'],
      [[...base, '--at-cyc-per-mm', 'abc'], 'at-cyc-per-mm'],
    ] as const) {
      const r = await ocellus('mtf', ...args);
      expect(r.code, flag).toBe(2);
      expect(r.err).toContain(`--${flag}`);
    }
  });
});
