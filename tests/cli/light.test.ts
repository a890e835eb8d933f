import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';

const repo = new URL('../..', import.meta.url).pathname;
const tmp = mkdtempSync(join(tmpdir(), 'ocellus-light-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

async function ocellus(...args: string[]) {
  const io = captureIo(repo);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err(), json: () => JSON.parse(io.out()) as Record<string, any> };
}

const pixel = ['--pixel-pitch-um', '3', '--exposure-ms', '10'];

describe('ocellus light', () => {
  it('answers with the keys photons, electrons, photons_per_lux_s_um2 and band_nm', async () => {
    const r = await ocellus('light', '--illuminance-lux', '10', '--illuminant', 'cie-d65', ...pixel, '--qe', '0.5', '--json');
    expect(r.code).toBe(0);
    expect(Object.keys(r.json()).sort()).toEqual(['band_nm', 'electrons', 'photons', 'photons_per_lux_s_um2']);
    expect(r.json().electrons).toBeCloseTo(0.5 * r.json().photons, 6);
  });
  it('D65 behind a 700 nm IR cut: 1 lux·s on 1 µm² gives about 2.9 × 4,090 photons (4,090 at 555 nm: 50.34·A·t·λ·E with 1 lx = 0.1464 µW/cm², EMVA 1288 and SI 683 lm/W)', async () => {
    const j = (await ocellus('light', '--illuminance-lux', '1', '--illuminant', 'cie-d65', '--pixel-pitch-um', '1', '--exposure-ms', '1000', '--ir-cut-nm', '700', '--json')).json();
    expect(j.photons_per_lux_s_um2 / 4090).toBeGreaterThan(2.85);
    expect(j.photons_per_lux_s_um2 / 4090).toBeLessThan(2.95);
    expect(j.photons).toBeCloseTo(j.photons_per_lux_s_um2, 6);
    expect(j.band_nm[1]).toBe(700);
  });
  it('a near-infrared LED in W/m²: photons_per_lux_s_um2 is null and the band sits around 850 nm', async () => {
    const j = (await ocellus('light', '--irradiance-w-m2', '0.5', '--illuminant', 'nir', '--nir-centre-nm', '850', '--nir-width-nm', '40', ...pixel, '--json')).json();
    expect(j.photons_per_lux_s_um2).toBeNull();
    // 0.5 W/m² × 9 µm² × 10 ms × λ/(hc) at 850 nm (4.279e18 /J) ≈ 1.93e5 photons.
    expect(j.photons / 1.9256e5).toBeCloseTo(1, 2);
    expect(j.band_nm[0]).toBeGreaterThan(780);
  });
  it('reads a QE curve file and names a bad point by its path', async () => {
    const good = join(tmp, 'qe.json');
    writeFileSync(good, JSON.stringify([{ wavelengthNm: 400, value: 0.4 }, { wavelengthNm: 700, value: 0.4 }]));
    const r = await ocellus('light', '--illuminance-lux', '10', '--illuminant', 'led-white', ...pixel, '--qe-curve', good, '--json');
    expect(r.code).toBe(0);
    expect(r.json().band_nm[0]).toBeGreaterThanOrEqual(400);
    const bad = join(tmp, 'bad.json');
    writeFileSync(bad, JSON.stringify([{ wavelengthNm: 400, value: 0.4 }, { wavelengthNm: 700, value: 1.4 }]));
    const b = await ocellus('light', '--illuminance-lux', '10', '--illuminant', 'led-white', ...pixel, '--qe-curve', bad);
    expect(b.code).toBe(2);
    expect(b.err).toContain('[1].value: must be a fraction between 0 and 1');
  });
  it('refuses lux for an NIR LED, both or neither level, and an unknown illuminant, naming the flag', async () => {
    expect((await ocellus('light', '--illuminance-lux', '5', '--illuminant', 'nir', ...pixel)).err).toContain('give its irradiance with --irradiance-w-m2');
    expect((await ocellus('light', '--illuminant', 'cie-a', ...pixel)).err).toContain('exactly one of --illuminance-lux or --irradiance-w-m2');
    const u = await ocellus('light', '--illuminance-lux', '5', '--illuminant', 'sodium', ...pixel);
    expect(u.code).toBe(2);
    expect(u.err).toContain("--illuminant must be one of cie-a, cie-d65, led-white, led-horticultural, nir, got 'sodium'");
    expect((await ocellus('light', '--irradiance-w-m2', '1', '--illuminant', 'nir', '--nir-width-nm', '-3', ...pixel)).err).toContain('--nir-width-nm');
  });
  it('`ocellus photons` keeps its monochromatic form', async () => {
    const r = await ocellus('photons', '--irradiance-uw-cm2', '1', '--pixel-pitch-um', '1', '--exposure-ms', '1', '--wavelength-nm', '1000', '--qe', '0.5', '--dark-noise-e', '0', '--gain-dn-per-e', '1', '--json');
    expect(r.code).toBe(0);
    // 50.34 · 1 µm² · 1 ms · 1 µm · 1 µW/cm² = 50.34 photons (EMVA 1288).
    expect(r.json().photons).toBeCloseTo(50.34, 1);
  });
});
