import { readFileSync, writeFileSync, appendFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { systemClock } from '../../device-agent/clock.js';
import { resolveAgentSettings } from '../../device-agent/config.js';
import type { ProfileDriver, ProfileTarget } from '../../device-agent/driver.js';
import { openEventLog } from '../../device-agent/event-log.js';
import { apertureTravelMs, focusTravelMs, nearestStopIndex, weightsLoadMs } from '../../device-agent/sim-physics.js';
import { createSimDriver } from '../../device-agent/sim-driver.js';
import { switchProfile } from '../../device-agent/switcher.js';
import { demoDeviceClass, demoTask, demoWeights, tempDir } from '../support/agent-fixtures.js';

const dirs: Array<{ remove(): void }> = [];
afterAll(() => dirs.forEach((d) => d.remove()));

describe('simulated actuation (sim-physics)', () => {
  it('focus travel from 0.5 m to 0.25 m is 2 dioptres (dioptre = 1/m, common practice): 8 ms at 4 ms/D', () => {
    expect(focusTravelMs(0.5, 0.25, 4)).toBeCloseTo(8, 12);
    expect(focusTravelMs(0.25, 0.5, 4)).toBeCloseTo(8, 12);
  });

  it('focus from rest at infinity (0 D) to 2 m is 0.5 D', () => {
    expect(focusTravelMs(null, 2, 10)).toBeCloseTo(5, 12);
  });

  it('aperture travel counts lens stops between f-numbers: f/1.8 to f/5.6 is 3 stops of the lens table', () => {
    const stops = demoDeviceClass.lens.fNumberStops;
    expect(nearestStopIndex(4.2, stops)).toBe(2);
    expect(apertureTravelMs(1.8, 5.6, stops, 10)).toBe(30);
  });

  it('weights load time is size over flash read rate: 25 MB at 100 MB/s is 250 ms (MB = 10^6 bytes)', () => {
    expect(weightsLoadMs(25_000_000, 100)).toBeCloseTo(250, 9);
  });

  it('telemetry is the prediction times the hidden efficiency, within the 2 % noise', async () => {
    const driver = createSimDriver({ clock: systemClock, timeScale: 0, efficiency: 1.3, seed: 3 });
    const w = demoWeights('t');
    const target: ProfileTarget = { releaseId: 'r', taskName: 'rows', task: demoTask('m', w, 0.5, 4), deviceClass: demoDeviceClass, weightsPath: '/x' };
    expect(driver.readTelemetry()).toBeNull();
    await driver.applyCamera(target.task.camera, target);
    const samples = Array.from({ length: 200 }, () => driver.readTelemetry()!.inferenceMsMean / 12);
    const mean = samples.reduce((a, b) => a + b, 0) / samples.length;
    expect(mean).toBeGreaterThan(1.3 * 0.99);
    expect(mean).toBeLessThan(1.3 * 1.01);
  });
});

describe('transactional switch', () => {
  const w1 = demoWeights('a');
  const w2 = demoWeights('b');
  const t = (name: string, task: ReturnType<typeof demoTask>): ProfileTarget => ({ releaseId: 'r', taskName: name, task, deviceClass: demoDeviceClass, weightsPath: '/x' });
  const rows = t('rows', demoTask('m1', w1, 0.5, 4));
  const leaves = t('leaves', { ...demoTask('m2', w2, 0.25, 2.8), memory: { weightBufferKib: 1500, activationBufferKib: 500 } });

  it('runs every step of the new profile, or puts every step back when one fails', async () => {
    for (const failStep of ['setMemoryPartition', 'loadWeights', 'applyCamera'] as const) {
      const driver = createSimDriver({ clock: systemClock, timeScale: 0, failStep, failTask: 'leaves' });
      expect((await switchProfile(driver, null, rows, systemClock)).ok).toBe(true);
      const before = driver.hardware();
      const outcome = await switchProfile(driver, rows, leaves, systemClock);
      expect(outcome).toMatchObject({ ok: false, step: failStep, restored: true });
      expect(driver.hardware()).toEqual(before);
    }
  });

  it('says restored: false when putting the old profile back fails too', async () => {
    let calls = 0;
    const broken: ProfileDriver = {
      name: 'broken',
      setMemoryPartition: async () => {},
      loadWeights: async () => {
        calls += 1;
        throw new Error('flash read error');
      },
      applyCamera: async () => {},
      readTelemetry: () => null,
    };
    expect(await switchProfile(broken, rows, leaves, systemClock)).toMatchObject({ ok: false, step: 'loadWeights', restored: false });
    expect(calls).toBe(2);
  });
});

describe('event log on disk', () => {
  it('keeps unacknowledged events across a restart, numbering on from the last one', () => {
    const dir = tempDir('evlog');
    dirs.push(dir);
    const log = openEventLog(dir.path, systemClock);
    for (let i = 0; i < 5; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
    log.ack(2);
    log.close();
    const again = openEventLog(dir.path, systemClock);
    expect(again.ackedUpTo()).toBe(2);
    expect(again.after(0, 100, 1e6).map((e) => e.seq)).toEqual([3, 4, 5]);
    expect(again.append({ type: 'motion', moving: true })).toBe(6);
    again.close();
  });

  it('ignores a line torn by a crash mid-write', () => {
    const dir = tempDir('evlog-torn');
    dirs.push(dir);
    const log = openEventLog(dir.path, systemClock);
    log.append({ type: 'motion', moving: true });
    log.close();
    appendFileSync(join(dir.path, 'events.log'), '{"seq":2,"ts":"20');
    const again = openEventLog(dir.path, systemClock);
    expect(again.lastSeq()).toBe(1);
    expect(again.append({ type: 'motion', moving: false })).toBe(2);
    again.close();
    expect(readFileSync(join(dir.path, 'events.log'), 'utf8').trim().split('\n').map((l) => JSON.parse(l).seq)).toEqual([1, 2]);
  });

  it('compacts the file once enough is acknowledged, keeping only what is not', async () => {
    const dir = tempDir('evlog-compact');
    dirs.push(dir);
    const log = openEventLog(dir.path, systemClock);
    for (let i = 0; i < 600; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
    log.ack(550);
    await log.settled();
    const lines = readFileSync(join(dir.path, 'events.log'), 'utf8').trim().split('\n');
    expect(lines.map((l) => JSON.parse(l).seq)).toEqual(Array.from({ length: 50 }, (_v, i) => 551 + i));
    log.close();
  });
});

describe('agent configuration', () => {
  const base = { deviceId: 'gh-07', deviceClassId: 'gh-rowcam-a', brokerUrl: 'mqtt://127.0.0.1:1884', password: 'pw', serverUrl: 'http://127.0.0.1:8080', publicKeyPath: '/k.pem', dataDir: '/d' };

  it('takes the file, then the environment, then flags, each overriding the one before', () => {
    const dir = tempDir('agent-config');
    dirs.push(dir);
    const file = join(dir.path, 'agent.json');
    writeFileSync(file, JSON.stringify({ ...base, controlPort: 7000 }));
    const r = resolveAgentSettings({
      argv: ['--config', file, '--control-port', '7002'],
      env: { OCELLUS_AGENT_CONTROL_PORT: '7001', OCELLUS_AGENT_SIM_TIME_SCALE: '0' },
      readFile: (p) => readFileSync(p, 'utf8'),
    });
    expect(r).toMatchObject({ ok: true, settings: { controlPort: 7002, simTimeScale: 0, deviceId: 'gh-07', ackTimeoutMs: 2000 } });
  });

  it('names the source and field of a bad value, and refuses a control host off loopback', () => {
    const r = resolveAgentSettings({
      argv: ['--broker-url', 'http://wrong', '--control-host', '0.0.0.0', '--colour', 'red'],
      env: {},
      readFile: () => JSON.stringify(base),
    });
    expect(r).toEqual({ ok: false, issues: [{ path: '--colour', message: expect.stringContaining('unknown option') }] });
    const r2 = resolveAgentSettings({ argv: ['--broker-url', 'http://wrong', '--control-host', '0.0.0.0'], env: { OCELLUS_AGENT_CONFIG: '/a.json' }, readFile: () => JSON.stringify(base) });
    expect(r2.ok).toBe(false);
    if (!r2.ok) {
      expect(r2.issues.map((i) => i.path)).toEqual(['--broker-url', '--control-host']);
      expect(r2.issues[0]!.message).toContain('mqtt://');
    }
    const r3 = resolveAgentSettings({ argv: [], env: {}, readFile: () => '' });
    expect(r3.ok).toBe(false);
    if (!r3.ok) expect(r3.issues.find((i) => i.path.startsWith('deviceId'))?.path).toContain('OCELLUS_AGENT_DEVICE_ID');
  });
});
