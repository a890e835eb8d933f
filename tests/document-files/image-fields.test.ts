import { describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { deviceClassSchema, modelSchema, parseWith, taskSchema } from '../../src/schema/index.js';
import { fixture } from '../support/validate-fixtures.js';

const repo = new URL('../..', import.meta.url).pathname;

describe('fields of the image model in the documents', () => {
  it('documents written before the fields still parse, with defaults: global shutter, fill factor 1, no turning', () => {
    const { deviceClass, task, model } = fixture();
    expect(deviceClass.sensor).toMatchObject({ shutter: 'global', fillFactor: 1 });
    expect(deviceClass.sensor.lineTimeUs).toBeUndefined();
    expect(task).toMatchObject({ maxYawRateDegPerS: 0, maxPitchRateDegPerS: 0 });
    expect(task.featureContrast).toBeUndefined();
    expect(model.blurUnit).toBeUndefined();
    expect(model.measuredForTaskIds).toBeUndefined();
  });

  it('refuses bad values with the field path', () => {
    const { deviceClass, task, model } = fixture();
    const dc = parseWith(deviceClassSchema, { ...deviceClass, sensor: { ...deviceClass.sensor, shutter: 'leaf', fillFactor: 1.2 } });
    expect(dc.ok).toBe(false);
    if (!dc.ok) expect(dc.issues.map((i) => i.path).sort()).toEqual(['sensor.fillFactor', 'sensor.shutter']);
    const t = parseWith(taskSchema, { ...task, maxYawRateDegPerS: -1 });
    expect(t.ok).toBe(false);
    if (!t.ok) expect(t.issues[0]!.path).toBe('maxYawRateDegPerS');
    const m = parseWith(modelSchema, { ...model, blurUnit: 'mm', measuredForTaskIds: [] });
    expect(m.ok).toBe(false);
    if (!m.ok) expect(m.issues.map((i) => i.path).sort()).toEqual(['blurUnit', 'measuredForTaskIds']);
  });

  it('per-task curves must name a task the model was measured for, once', () => {
    const { model } = fixture();
    const curve = [{ blurPx: 0, accuracy: 0.9 }, { blurPx: 2, accuracy: 0.8 }];
    const m = parseWith(modelSchema, { ...model, measuredForTaskIds: ['a'], taskCurves: [{ taskId: 'b', accuracyVsBlur: curve }, { taskId: 'a' }, { taskId: 'a' }] });
    expect(m.ok).toBe(false);
    if (!m.ok) {
      expect(m.issues.find((i) => i.path === 'taskCurves.0.taskId' || i.path === 'taskCurves[0].taskId')?.message).toContain('not among measuredForTaskIds');
      expect(m.issues.some((i) => i.message.includes('has curves twice'))).toBe(true);
    }
  });

  it('ocellus schema shows the new fields', async () => {
    const show = async (kind: string) => {
      const io = captureIo(repo);
      expect(await dispatch(['schema', kind], io)).toBe(0);
      return io.out();
    };
    const dc = await show('device-class');
    for (const f of ['shutter', 'lineTimeUs', 'fillFactor']) expect(dc).toContain(`"${f}"`);
    const task = await show('task');
    for (const f of ['maxYawRateDegPerS', 'maxPitchRateDegPerS', 'featureContrast', 'maxRollingSkewPx']) expect(task).toContain(`"${f}"`);
    const model = await show('model');
    for (const f of ['blurUnit', 'measuredForTaskIds', 'taskCurves']) expect(model).toContain(`"${f}"`);
  });
});
