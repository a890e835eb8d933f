import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';

const repo = join(import.meta.dirname, '..', '..');
const demo = 'profiles/greenhouse-demo';
const tmp = mkdtempSync(join(tmpdir(), 'ocellus-cli-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

async function ocellusIn(cwd: string, ...args: string[]) {
  const io = captureIo(cwd);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err(), json: () => JSON.parse(io.out()) as Record<string, any> };
}
const ocellus = (...args: string[]) => ocellusIn(repo, ...args);

function write(rel: string, text: string) {
  const file = join(tmp, rel);
  mkdirSync(join(file, '..'), { recursive: true });
  writeFileSync(file, text);
}

describe('ocellus check', () => {
  it('checks every demo profile and exits 1 only because leaf-inspection-wide-open and leaf-inspection-c-cpu fail on purpose', async () => {
    const r = await ocellus('check', 'profiles/', '--json');
    expect(r.code).toBe(1);
    const j = r.json();
    expect(Object.keys(j).sort()).toEqual(['issues', 'profiles']);
    expect(j.issues).toEqual([]);
    expect(j.profiles).toHaveLength(10);
    for (const p of j.profiles) {
      expect(Object.keys(p).sort()).toEqual(['checks', 'file', 'profile', 'status']);
      expect(p.checks.length).toBeGreaterThanOrEqual(13);
      for (const c of p.checks) expect(Object.keys(c).filter((k) => k !== 'figures').sort()).toEqual(['actual', 'code', 'limit', 'message', 'path', 'status', 'unit']);
      // The combined blur the checks used, in both pixel units.
      const combined = p.checks.find((c: { code: string }) => c.code === 'blur-over-range');
      expect(combined.figures.combinedSensorPx).toBeGreaterThan(combined.figures.combinedInputPx);
    }
    const failing = j.profiles.filter((p: { status: string }) => p.status === 'fail').map((p: { profile: string }) => p.profile);
    expect(failing).toEqual(['leaf-inspection-c-cpu', 'leaf-inspection-wide-open']);
    // The CPU-bound profile fails throughput although its latency fits, and the CPU's draw fails energy and power.
    const cpu = j.profiles.find((p: { profile: string }) => p.profile === 'leaf-inspection-c-cpu');
    const failed = cpu.checks.filter((c: { status: string }) => c.status === 'fail').map((c: { code: string }) => c.code);
    expect(failed.sort()).toEqual(['average-power', 'energy-per-frame', 'throughput']);
    expect(cpu.checks.find((c: { code: string }) => c.code === 'latency').status).toBe('pass');
    const wide = j.profiles.find((p: { profile: string }) => p.profile === 'leaf-inspection-wide-open');
    const blur = wide.checks.find((c: { code: string }) => c.code === 'blur-over-range');
    expect(blur).toMatchObject({ status: 'fail', path: 'camera.fNumber', unit: 'input px' });
    expect(blur.message).toContain('depth of field at f/1.8 cannot cover the range');
  });

  it('a passing profile alone exits 0, its references resolved through ./profiles', async () => {
    const r = await ocellus('check', `${demo}/task-profiles/row-navigation-a.json`);
    expect(r.code).toBe(0);
    expect(r.out).toContain('row-navigation-a');
    expect(r.out).toContain('blur-over-range');
    expect(r.out).toContain('1 profiles: 1 pass');
  });

  it('a missing reference exits 2 naming the file, field and id', async () => {
    write('orphans/greenhouse-x.json', JSON.stringify({
      kind: 'profile', id: 'greenhouse-x', taskId: 'foo', deviceClassId: 'gh-scout-a', modelId: 'row-guide-a',
      camera: { focusDistanceM: 1, fNumber: 4, exposureUs: 1000, analogGain: 1 }, memory: { weightBufferKib: 1, activationBufferKib: 1 },
    }));
    const r = await ocellus('check', join(tmp, 'orphans'));
    expect(r.code).toBe(2);
    expect(r.err).toContain("greenhouse-x.json: taskId: profile greenhouse-x: taskId 'foo' not found in the catalog");
  });

  it('a malformed file exits 2 with the file name in the message', async () => {
    write('broken/bad.json', '{ "kind": "profile", ');
    const r = await ocellusIn(tmp, 'check', 'broken', '--json');
    expect(r.code).toBe(2);
    // The text ends after 21 characters on line 1, so the problem is at line 1, column 22.
    expect(r.json().issues).toEqual([{ file: 'broken/bad.json', path: '(root)', line: 1, column: 22, message: expect.stringMatching(/^not valid JSON/) }]);
    expect(r.err).toContain('broken/bad.json:1:22: not valid JSON');
  });

  it('no paths, or paths without profiles, exit 2', async () => {
    expect((await ocellus('check')).code).toBe(2);
    write('empty/readme.md', 'nothing here');
    const r = await ocellusIn(tmp, 'check', 'empty');
    expect(r.code).toBe(2);
    expect(r.err).toContain('no profiles found under empty');
  });
});

describe('ocellus cost', () => {
  it('MobileNetV1 1.0-224: 568,740,352 MACs and 4,210,088 parameters (Howard et al. 2017, Table 1 rebuilt; 569 M / 4.2 M in Table 6)', async () => {
    const r = await ocellus('cost', `${demo}/networks/mobilenet-v1-1.0-224.json`, '--json');
    expect(r.code).toBe(0);
    const j = r.json();
    expect(Object.keys(j).sort()).toEqual(['batch_norm_params', 'layers', 'macs', 'params', 'peak_activation_bytes']);
    expect(j.macs).toBe(568_740_352);
    expect(j.params).toBe(4_210_088);
    expect(Object.keys(j.layers[0]).sort()).toEqual(['id', 'input_bytes', 'macs', 'op', 'out_shape', 'output_bytes', 'params', 'weight_bytes']);
    expect(j.layers[0]).toMatchObject({ op: 'conv', out_shape: [32, 112, 112] });
    // Largest layer activations: pw1 reads 32×112×112 and writes 64×112×112 = 1,204,224 elements, 1 byte each at int8.
    expect(j.peak_activation_bytes).toBe(1_204_224);
  });

  it('MobileNetV1 0.5-160 is about 76 M MACs and 1.32 M parameters (from memory: Howard et al. 2017, width 0.5 at 160 px)', async () => {
    const j = (await ocellus('cost', `${demo}/networks/mobilenet-v1-0.5-160.json`, '--json')).json();
    expect(j.macs / 1e6).toBeCloseTo(76.5, 0);
    expect(j.params / 1e6).toBeCloseTo(1.32, 2);
  });

  it('with a device class it adds roofline latency and energy', async () => {
    const r = await ocellus('cost', `${demo}/networks/mobilenet-v1-0.5-160.json`, '--device-class', `${demo}/device-classes/gh-scout-a.json`,
      '--weight-buffer-kib', '1536', '--activation-buffer-kib', '512', '--json');
    expect(r.code).toBe(0);
    const j = r.json();
    expect(Object.keys(j).sort()).toEqual(['batch_norm_params', 'compute_bound_layers', 'dram_bytes', 'energy_mj', 'latency_ms', 'layers', 'macs', 'params', 'peak_activation_bytes']);
    // Compute floor: 76,524,800 MACs / (256 MAC units × 600 MHz) = 0.498 ms (roofline, Williams et al. 2009).
    expect(j.latency_ms).toBeGreaterThanOrEqual(76_524_800 / (256 * 600e6) * 1000 - 1e-9);
    expect(j.energy_mj).toBeGreaterThan(0);
    expect(Number.isInteger(j.compute_bound_layers)).toBe(true);
  });

  it('human-readable output lists the layers', async () => {
    const r = await ocellus('cost', `${demo}/networks/gh-tiny-det-128.json`);
    expect(r.code).toBe(0);
    expect(r.out).toContain('multiply-accumulates');
    expect(r.out).toContain('res3');
  });

  it('a malformed network file exits 2 with the file name', async () => {
    write('nets/bad.json', '{"layers": [');
    const r = await ocellusIn(tmp, 'cost', 'nets/bad.json');
    expect(r.code).toBe(2);
    expect(r.err).toContain('nets/bad.json:1:13: not valid JSON');
  });

  it('a schema error exits 2 naming the field path', async () => {
    write('nets/no-layers.json', JSON.stringify({ name: 'x', input: { channels: 3, height: 8, width: 8 }, layers: [{ op: 'conv', kernel: 3 }] }));
    const r = await ocellusIn(tmp, 'cost', 'nets/no-layers.json');
    expect(r.code).toBe(2);
    expect(r.err).toContain('nets/no-layers.json: missing: layers[0].out (expected a number)');
  });

  it('a layer that cannot be built exits 2 naming the layer', async () => {
    write('nets/mismatch.json', JSON.stringify({ name: 'x', input: { channels: 3, height: 8, width: 8 }, layers: [{ id: 'a', op: 'conv', out: 3, kernel: 3, groups: 2 }] }));
    const r = await ocellusIn(tmp, 'cost', 'nets/mismatch.json');
    expect(r.code).toBe(2);
    expect(r.err).toContain('nets/mismatch.json: layers[0].groups: layer "a": groups 2 does not divide the 3 input channels');
  });

  it.each([
    [['nets/missing.json'], 'nets/missing.json: (root): no such file'],
    [[], 'give exactly one network file'],
    [['nets/edge.json', '--weight-buffer-kib', '10'], '--weight-buffer-kib and --activation-buffer-kib need --device-class'],
    [['nets/edge.json', '--precision', 'int4'], "--precision must be int8 or fp16, got 'int4'"],
    [['nets/edge.json', '--json', 'extra.json'], 'give exactly one network file'],
  ])('bad usage %j exits 2', async (args, message) => {
    write('nets/edge.json', JSON.stringify({ name: 'edge', input: { channels: 1, height: 4, width: 4 }, layers: [{ op: 'fc', out: 2 }] }));
    const r = await ocellusIn(tmp, 'cost', ...args);
    expect(r.code).toBe(2);
    expect(r.err).toContain(message);
  });

  it('buffers larger than the SRAM, or not numbers, exit 2 naming the flags', async () => {
    const net = `${demo}/networks/gh-tiny-det-128.json`;
    const dc = `${demo}/device-classes/gh-scout-a.json`;
    const big = await ocellus('cost', net, '--device-class', dc, '--weight-buffer-kib', '2048', '--activation-buffer-kib', '512');
    expect(big.code).toBe(2);
    expect(big.err).toContain('exceed the 2048 KiB SRAM of device class gh-scout-a');
    const nan = await ocellus('cost', net, '--device-class', dc, '--activation-buffer-kib', 'lots');
    expect(nan.code).toBe(2);
    expect(nan.err).toContain("--activation-buffer-kib must be a finite number, got 'lots'");
    const wrongKind = await ocellus('cost', net, '--device-class', `${demo}/tasks/fruit-counting.json`);
    expect(wrongKind.code).toBe(2);
    expect(wrongKind.err).toContain('is "task" but a device-class document is needed here');
  });
});
