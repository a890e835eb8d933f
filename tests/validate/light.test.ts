import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { loadCatalog, profilesOf, resolveProfile } from '../../src/document-files/index.js';
import { deviceClassSchema, parseWith, taskSchema } from '../../src/schema/index.js';
import { validate } from '../../src/validate/index.js';
import type { ValidationInput } from '../../src/validate/index.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

const DEMO = fileURLToPath(new URL('../../profiles/greenhouse-demo', import.meta.url));

async function demoInput(profileId: string): Promise<ValidationInput> {
  const catalog = await loadCatalog([DEMO]);
  const found = profilesOf(catalog).find((p) => p.profile.id === profileId)!;
  const r = resolveProfile(catalog, found.profile, found.file);
  if (!r.ok) throw new Error(r.issues.map((i) => i.message).join('; '));
  return r.value;
}

function withCamera(input: ValidationInput, camera: Partial<ValidationInput['profile']['camera']>): ValidationInput {
  return { ...input, profile: { ...input.profile, camera: { ...input.profile.camera, ...camera } } };
}

describe('clipping under the grow lights (regression on demo data)', () => {
  it('fruit counting on scout A at 2000 µs passes clipping-bright under the 550 nm approximation but clips under the red/blue grow light (CIE 1924 V(λ): red light carries few lux per watt)', async () => {
    const input = withCamera(await demoInput('fruit-counting-a'), { exposureUs: 2000 });
    const { scene: _scene, ...taskWithoutScene } = input.task;
    const approx = checkOf(validate({ ...input, task: taskWithoutScene }), 'clipping-bright');
    expect(approx.status).toBe('pass');
    expect(approx.message).toContain('one design wavelength is assumed');
    const honest = checkOf(validate(input), 'clipping-bright');
    expect(honest.status).toBe('fail');
    expect(honest.message).toContain('red/blue grow light');
    expect(honest.actual! / approx.actual!).toBeGreaterThan(8);
  });
  it('the demo profile itself stays below saturation under the grow lights', async () => {
    expect(checkOf(validate(await demoInput('fruit-counting-a')), 'clipping-bright').status).not.toBe('fail');
  });
});

describe('gain with read noise per gain and an 8-bit network input (EMVA 1288 R4.0)', () => {
  it('on the low-light patrol, gain 4 gives several dB more SNR in the dark corner than gain 1 at the same exposure', async () => {
    const input = await demoInput('low-light-patrol-a');
    const g1 = checkOf(validate(withCamera(input, { analogGain: 1 })), 'snr-dark').actual!;
    const g4 = checkOf(validate(withCamera(input, { analogGain: 4 })), 'snr-dark').actual!;
    expect(g4 - g1).toBeGreaterThan(2);
  });
  it('a failing SNR dominated by quantisation points at the gain', async () => {
    const input = withCamera(await demoInput('low-light-patrol-a'), { analogGain: 1, exposureUs: 2000 });
    const c = checkOf(validate(input), 'snr-dark');
    expect(c.status).toBe('fail');
    expect(c.path).toBe('camera.analogGain');
  });
});

describe("the robot's NIR flood light (inverse-square, Lambertian reflection)", () => {
  it('adds signal on scout A (no IR cut) but hardly any on scout B behind its 700 nm IR cut', async () => {
    const a = await demoInput('low-light-patrol-a');
    const withLight = checkOf(validate(a), 'snr-dark').actual!;
    const { robotLight: _off, ...sceneNoLight } = a.task.scene!;
    const withoutLight = checkOf(validate({ ...a, task: { ...a.task, scene: sceneNoLight } }), 'snr-dark').actual!;
    expect(withLight - withoutLight).toBeGreaterThan(2);
    const b = await demoInput('low-light-patrol-b');
    const bNoLight = checkOf(validate({ ...b, task: { ...b.task, scene: sceneNoLight } }), 'snr-dark').actual!;
    expect(checkOf(validate(b), 'snr-dark').actual! - bNoLight).toBeLessThan(0.5);
  });
  it('a light the device class does not carry fails snr-dark and clipping-bright at taskId, naming the light', () => {
    const input = fixture({ task: { scene: { illuminant: { type: 'cie-d65' }, robotLight: 'spot' } } });
    const c = checkOf(validate(input), 'snr-dark');
    expect(c).toMatchObject({ status: 'fail', path: 'taskId' });
    expect(c.message).toContain('"spot"');
    expect(checkOf(validate(input), 'clipping-bright').status).toBe('fail');
  });
  it('ambient NIR light given as a luminance cannot be estimated, and says why', () => {
    const c = checkOf(validate(fixture({ task: { scene: { illuminant: { type: 'nir', centreNm: 850, widthNm: 40 } } } })), 'snr-dark');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('carries no visible light');
  });
});

describe('power, energy and throughput bind on the CPU-bound demo profile', () => {
  it('leaf-inspection-c-cpu fails throughput (206 ms of inference in a 200 ms frame) while latency passes, and fails energy and power', async () => {
    const r = validate(await demoInput('leaf-inspection-c-cpu'));
    expect(checkOf(r, 'latency').status).toBe('pass');
    const t = checkOf(r, 'throughput');
    expect(t.status).toBe('fail');
    expect(t.limit).toBeCloseTo(200, 9);
    expect(t.message).toContain('inference');
    expect(checkOf(r, 'energy-per-frame').status).toBe('fail');
    expect(checkOf(r, 'average-power').status).toBe('fail');
    expect(r.figures.throughput?.busiest).toBe('inference');
  });
  it('the same settings on scout B pass throughput, with the idle accelerator named in the energy message', async () => {
    const r = validate(await demoInput('leaf-inspection-b'));
    expect(checkOf(r, 'throughput').status).toBe('pass');
    expect(checkOf(r, 'energy-per-frame').message).toContain('not power-gated');
  });
});

describe('bad light input: a clear error with the field path', () => {
  const dc = (sensorPatch: Record<string, unknown>) => {
    const base = fixture().deviceClass;
    return parseWith(deviceClassSchema, { ...base, sensor: { ...base.sensor, ...sensorPatch } });
  };
  it('a QE point out of [0, 1]', () => {
    const r = dc({ quantumEfficiencyCurve: [{ wavelengthNm: 400, value: 0.5 }, { wavelengthNm: 500, value: 1.2 }] });
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.issues).toContainEqual({ path: 'sensor.quantumEfficiencyCurve[1].value', message: 'must be a fraction between 0 and 1' });
  });
  it('unsorted wavelengths', () => {
    const r = dc({ quantumEfficiencyCurve: [{ wavelengthNm: 400, value: 0.5 }, { wavelengthNm: 600, value: 0.6 }, { wavelengthNm: 500, value: 0.6 }] });
    expect(r.ok).toBe(false);
    if (!r.ok) {
      expect(r.issues[0]!.path).toBe('sensor.quantumEfficiencyCurve[2].wavelengthNm');
      expect(r.issues[0]!.message).toContain('strictly increasing: 500 nm follows 600 nm');
    }
  });
  it('an NIR illuminant without its centre and width', () => {
    const base = fixture().task;
    const r = parseWith(taskSchema, { ...base, scene: { illuminant: { type: 'nir' } } });
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.issues.map((i) => i.path).sort()).toEqual(['scene.illuminant.centreNm', 'scene.illuminant.widthNm']);
  });
  it('an unknown illuminant type names the field', () => {
    const base = fixture().task;
    const r = parseWith(taskSchema, { ...base, scene: { illuminant: { type: 'sodium' } } });
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.issues[0]!.path).toBe('scene.illuminant.type');
  });
  it('a robot light with neither intensity nor irradiance', () => {
    const base = fixture().deviceClass;
    const r = parseWith(deviceClassSchema, { ...base, lights: [{ id: 'x', illuminant: { type: 'led-white' }, electricalPowerW: 1 }] });
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.issues[0]).toMatchObject({ path: 'lights[0].radiantIntensityWPerSr' });
  });
});
