import { physicalLimitIssues } from '../schema/index.js';
import type { Check } from '../schema/index.js';
import { againstMin, fmt, makeCheck } from './check.js';
import type { ValidationInput } from './input.js';
import type { BlurPoint } from './image-model.js';
import { accuracyAtBlur, accuracyAtSnr, blurIn, curvesFor, unitLabel } from './tolerance.js';

/** Settings the device class cannot take become failing checks at the offending field. */
export function physicalLimitChecks(input: ValidationInput): Check[] {
  return physicalLimitIssues(input.profile, input.deviceClass).map((i) =>
    makeCheck('physical-limit', 'fail', null, null, '', i.path, `${i.message} (device class ${input.deviceClass.id})`),
  );
}

/** The model must be built for the given network and for the accelerator's number format. */
export function consistencyChecks(input: ValidationInput): Check[] {
  const { model, network, deviceClass } = input;
  const checks: Check[] = [];
  const networkId = network.id ?? '(no id)';
  checks.push(
    model.networkId === network.id
      ? makeCheck('model-network', 'pass', null, null, '', 'modelId', `model ${model.id} runs network ${networkId}`)
      : makeCheck('model-network', 'fail', null, null, '', 'modelId', `model ${model.id} names network '${model.networkId}' but the network given is '${networkId}'`),
  );
  const precision = deviceClass.accelerator.precision;
  checks.push(
    model.precision === precision
      ? makeCheck('model-precision', 'pass', null, null, '', 'modelId', `model ${model.id} is ${model.precision}, as the accelerator of ${deviceClass.id} runs`)
      : makeCheck('model-precision', 'fail', null, null, '', 'modelId', `model ${model.id} is ${model.precision} but the accelerator of ${deviceClass.id} runs ${precision}`),
  );
  return checks;
}

/** The model must have been trained and measured for the profile's task. */
export function modelTaskCheck(input: ValidationInput): Check {
  const { model, task } = input;
  const tasks = model.measuredForTaskIds;
  if (tasks === undefined) {
    return makeCheck('model-task', 'warn', null, null, '', 'modelId',
      `model ${model.id} does not list the tasks it was measured for (measuredForTaskIds): its curves may not describe task ${task.id}`);
  }
  return tasks.includes(task.id)
    ? makeCheck('model-task', 'pass', null, null, '', 'modelId', `model ${model.id} was measured for task ${task.id}`)
    : makeCheck('model-task', 'fail', null, null, '', 'modelId',
      `model ${model.id} was measured for ${tasks.join(', ')}, not for task ${task.id}: its accuracy there is unknown`);
}

/**
 * Predicted accuracy: the model's accuracy (its curve for this task) at the worst combined blur, in the curve's own
 * pixels, and when it has an accuracy-vs-SNR curve, the lower of that and its accuracy at the darkest scene's
 * SNR. A blur beyond the measured curve fails: the curve says nothing there.
 */
export function accuracyCheck(input: ValidationInput, worst: BlurPoint, snrDarkDb: number | null): { check: Check; predicted: number | null } {
  const { model, task } = input;
  const curves = curvesFor(model, task.id);
  const parts: { accuracy: number; text: string; path: string; beyond: boolean }[] = [];
  const blurSensorPx = Number.isFinite(worst.totalPx) ? worst.totalPx : null;
  const figures = { combinedSensorPx: blurSensorPx, combinedInputPx: Number.isFinite(worst.totalInputPx) ? worst.totalInputPx : null, snrDarkDb: snrDarkDb !== null && Number.isFinite(snrDarkDb) ? snrDarkDb : null };
  if (curves.accuracyVsBlur) {
    const blur = blurIn(curves.blurUnit, worst.totalPx, worst.totalInputPx);
    const a = accuracyAtBlur(curves.accuracyVsBlur, blur);
    const assumed = curves.unitAssumed ? ', curve read as sensor px since the model declares no blurUnit' : '';
    const note = a.outside === 'above' ? ', beyond the measured curve: accuracy there is unknown' : '';
    parts.push({ accuracy: a.y, text: `${fmt(a.y)} at the worst combined blur ${fmt(blur)} ${unitLabel(curves.blurUnit)}${assumed}${note}`, path: 'camera.focusDistanceM', beyond: a.outside === 'above' });
  }
  if (curves.accuracyVsSnr && snrDarkDb !== null) {
    const a = accuracyAtSnr(curves.accuracyVsSnr, snrDarkDb);
    const note = a.outside === 'below' ? ', below the measured curve (its first value held)' : '';
    parts.push({ accuracy: a.y, text: `${fmt(a.y)} at the dark-scene SNR ${fmt(snrDarkDb)} dB${note}`, path: 'camera.exposureUs', beyond: false });
  }
  const which = curves.perTask ? ` (its curves for task ${task.id})` : '';
  if (parts.length === 0) {
    const why = curves.accuracyVsSnr ? 'the dark-scene SNR could not be estimated' : 'no curve: accuracy not predicted';
    return { check: { ...makeCheck('accuracy', 'warn', null, task.minAccuracy, 'fraction', 'modelId', `${why} (model ${model.id})`), figures }, predicted: null };
  }
  const worstPart = parts.reduce((w, p) => (p.accuracy < w.accuracy ? p : w), parts[0]!);
  const beyond = parts.find((p) => p.beyond);
  const v = againstMin(worstPart.accuracy, task.minAccuracy, '', 'the task minimum of {}');
  const ok = v.ok && !beyond;
  const tail = v.ok && beyond ? 'would meet the task minimum, but the blur lies beyond what the curve measured' : v.text;
  const message = `predicted accuracy${which} ${fmt(worstPart.accuracy)} (${parts.map((p) => p.text).join('; ')}) ${tail}`;
  const path = !v.ok ? worstPart.path : beyond ? beyond.path : worstPart.path;
  return { check: { ...makeCheck('accuracy', ok ? 'pass' : 'fail', worstPart.accuracy, task.minAccuracy, 'fraction', path, message), figures }, predicted: worstPart.accuracy };
}
