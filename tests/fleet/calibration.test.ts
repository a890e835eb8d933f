import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assignRelease } from '../../src/fleet/rollout/assign.js';
import { fitThroughOrigin } from '../../src/fleet/calibration/fit.js';
import { createCalibrator } from '../../src/fleet/calibration/calibrator.js';
import { createDriftMonitor } from '../../src/fleet/calibration/drift.js';
import { latencyVerdict } from '../../src/fleet/rollout/gate.js';
import { waitFor } from '../support/agent-fixtures.js';
import { startFleetRig, type FleetRig } from '../support/fleet-rig.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';

/** Demo data: three ordinary units and one whose hidden efficiency is 1.23 (23 % slower and hungrier than predicted). */
const units = [
  { id: 'cal-a', efficiency: 1, seed: 11 },
  { id: 'cal-b', efficiency: 1, seed: 12 },
  { id: 'cal-c', efficiency: 1, seed: 13 },
  { id: 'cal-odd', efficiency: 1.23, seed: 14 },
];
const WINDOWS = 40;

let rig: FleetRig;
const telemetryCount = (id: string) =>
  (sqliteHandle(rig.store).prepare("SELECT COUNT(*) AS n FROM device_events WHERE device_id = ? AND type = 'telemetry'").get(id) as { n: number }).n;

beforeAll(async () => {
  // The engine's own drift check runs rarely here, so the test decides when drift is checked.
  rig = await startFleetRig({ calibrationEveryMs: 3_600_000 });
  rig.storeRelease('gh-cal-1', 1);
  for (const u of units) {
    rig.enrol(u.id);
    // 0.1 s of real time between readings, with the simulated clock 100× faster: about 100 frames per window at 10 Hz.
    await rig.startAgent(u.id, { telemetryIntervalS: 0.1, simEfficiency: u.efficiency, simSeed: u.seed }, 100);
    const r = await assignRelease(rig.store, rig.bridge, { deviceId: u.id, releaseId: 'gh-cal-1', actor: 'test set-up', cause: 'manual' });
    expect(r.ok).toBe(true);
  }
  await waitFor(() => units.every((u) => telemetryCount(u.id) >= WINDOWS), `${WINDOWS} telemetry windows from every unit`, 60_000);
}, 90_000);

afterAll(async () => {
  await rig?.close();
});

describe('calibration from telemetry (least squares through the origin)', () => {
  it('k = Σw·m·p ÷ Σw·p² on a hand-worked pair of samples (regression through the origin, Eisenhauer 2003)', () => {
    // (12·10·1 + 22·20·3) ÷ (10²·1 + 20²·3) = 1440 ÷ 1300 = 1.10769…
    const fit = fitThroughOrigin([
      { measured: 12, predicted: 10, weight: 1 },
      { measured: 22, predicted: 20, weight: 3 },
    ]);
    expect(fit.factor).toBeCloseTo(1440 / 1300, 12);
    // Residuals (12 − 11.0769)/11.0769 = 0.08333 and (22 − 22.1538)/22.1538 = −0.006944; weighted RMS over weight 4.
    expect(fit.residualSpread).toBeCloseTo(Math.sqrt((1 * 0.0833333 ** 2 + 3 * 0.00694444 ** 2) / 4), 5);
    expect(fitThroughOrigin([{ measured: 5, predicted: 0, weight: 10 }])).toEqual({ factor: null, residualSpread: null });
  });

  it("recovers a simulated device's hidden efficiency factor within 5 % for latency and energy", () => {
    const fit = createCalibrator(rig.store).device('cal-odd')!;
    expect(fit.enough).toBe(true);
    expect(fit.windows).toBeGreaterThanOrEqual(WINDOWS);
    expect(Math.abs(fit.latency.factor! / 1.23 - 1)).toBeLessThan(0.05);
    expect(Math.abs(fit.energy.factor! / 1.23 - 1)).toBeLessThan(0.05);
    // The simulated noise is 2 % (sim-driver.ts); the spread of the residuals shows it.
    expect(fit.latency.residualSpread!).toBeGreaterThan(0.005);
    expect(fit.latency.residualSpread!).toBeLessThan(0.05);
    const plain = createCalibrator(rig.store).device('cal-a')!;
    expect(Math.abs(plain.latency.factor! - 1)).toBeLessThan(0.05);
  });

  it('fits the device class over every unit with sample counts, and hands the validator its factors once there is enough data', async () => {
    const cls = createCalibrator(rig.store).deviceClass('gh-rowcam-a');
    expect(cls.devices).toBe(4);
    expect(cls.windows).toBeGreaterThanOrEqual(4 * WINDOWS);
    expect(cls.frames).toBeGreaterThanOrEqual(1000);
    expect(cls.enough).toBe(true);
    expect(cls.perDevice.map((d) => d.deviceId).sort()).toEqual(units.map((u) => u.id).sort());
    // Equal predictions and frame rates: the class ratio lies between the plain units and the odd one.
    expect(cls.latency.factor!).toBeGreaterThan(1.02);
    expect(cls.latency.factor!).toBeLessThan(1.12);
    const forValidator = createCalibrator(rig.store).forValidator('gh-rowcam-a')!;
    expect(forValidator).toEqual({ latencyFactor: cls.latency.factor, energyFactor: cls.energy.factor, samples: cls.windows });
    const api = await rig.call('GET', '/api/v1/calibration/device-classes/gh-rowcam-a');
    expect(api.status).toBe(404); // the class is known from releases only: no device-class document is stored in this rig
    const device = await rig.call('GET', '/api/v1/calibration/devices/cal-odd');
    expect(device.status).toBe(200);
    expect(device.body.windows).toBeGreaterThanOrEqual(WINDOWS);
  });

  it('raises one drift episode per onset for the odd unit, visible in the API, and none for the others', async () => {
    const monitor = createDriftMonitor({ store: rig.store, clock: { now: () => new Date() } });
    const first = monitor.check();
    expect(first.map((c) => `${c.kind} ${c.record.deviceId} ${c.record.quantity}`).sort()).toEqual(['onset cal-odd energy', 'onset cal-odd latency']);
    const onset = first.find((c) => c.record.quantity === 'latency')!.record;
    // Against the three plain units, the odd one sits about 23 % high (tolerance 15 %).
    expect(onset.deviation).toBeGreaterThan(0.15);
    expect(Math.abs(onset.deviation - 0.23)).toBeLessThan(0.06);
    expect(monitor.check()).toEqual([]);
    const drift = await rig.call('GET', '/api/v1/drift?open=true');
    expect(drift.status).toBe(200);
    expect(drift.body.map((d: { deviceId: string }) => d.deviceId)).toEqual(['cal-odd', 'cal-odd']);
    const view = await rig.call('GET', '/api/v1/calibration/devices/cal-odd');
    expect(view.body.drift).toHaveLength(2);
    expect(view.body.drift[0].clearedAt).toBe(null);
  });

  it('keeps a class latency factor for the gate until the calibration engine refreshes', async () => {
    const kept = rig.calibration.latencyFactor('gh-rowcam-a');
    expect(kept).toBe(createCalibrator(rig.store).forValidator('gh-rowcam-a')!.latencyFactor);
    const before = telemetryCount('cal-a');
    await waitFor(() => telemetryCount('cal-a') > before + 2, 'newer telemetry from cal-a', 20_000);
    expect(rig.calibration.latencyFactor('gh-rowcam-a')).toBe(kept);
    rig.calibration.refresh();
    // No await between the two: nothing new is stored in between (the rig's bridge writes on this thread).
    expect(rig.calibration.latencyFactor('gh-rowcam-a')).toBe(createCalibrator(rig.store).forValidator('gh-rowcam-a')!.latencyFactor);
  });

  it('the gate compares measured latency with the calibrated prediction', () => {
    const ctx = {
      gate: { applyTimeoutS: 60, telemetryFrames: 10, telemetryTimeoutS: 60, latencyTolerance: 0.1 },
      offline: { waitS: 60, then: 'fail' as const },
      latencyFactor: 1.2,
    };
    // 100 frames measured at 12.6 ms against 10 ms predicted × 1.2 = 12 ms: +5 %, inside ±10 %.
    expect(latencyVerdict({ frames: 100, measuredMsSum: 1260, predictedMsSum: 1000 }, ctx).ok).toBe(true);
    // Without calibration the same reading is +26 %: outside.
    const raw = latencyVerdict({ frames: 100, measuredMsSum: 1260, predictedMsSum: 1000 }, { ...ctx, latencyFactor: 1 });
    expect(raw.ok).toBe(false);
    expect(raw.reason).toMatch(/\+26% from the expected 10\.00 ms/);
  });
});
