import { physicalLimitIssues } from '../schema/index.js';
import type { Check } from '../schema/index.js';
import { againstMin, fmt, makeCheck } from './check.js';
import type { ValidationInput } from './input.js';
import { accuracyAtBlur, accuracyAtSnr } from './tolerance.js';

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

/**
 * Predicted accuracy: the model's accuracy at the worst total blur, and when it has an accuracy-vs-SNR curve,
 * the lower of that and its accuracy at the darkest scene's SNR.
 */
export function accuracyCheck(input: ValidationInput, worstBlurPx: number, snrDarkDb: number | null): { check: Check; predicted: number | null } {
  const { model, task } = input;
  const parts: { accuracy: number; text: string; path: string }[] = [];
  if (model.accuracyVsBlur) {
    const a = accuracyAtBlur(model.accuracyVsBlur, worstBlurPx);
    const note = a.outside === 'above' ? ', beyond the measured curve (its last value held)' : '';
    parts.push({ accuracy: a.y, text: `${fmt(a.y)} at the worst blur ${fmt(worstBlurPx)} px${note}`, path: 'camera.focusDistanceM' });
  }
  if (model.accuracyVsSnr && snrDarkDb !== null) {
    const a = accuracyAtSnr(model.accuracyVsSnr, snrDarkDb);
    const note = a.outside === 'below' ? ', below the measured curve (its first value held)' : '';
    parts.push({ accuracy: a.y, text: `${fmt(a.y)} at the dark-scene SNR ${fmt(snrDarkDb)} dB${note}`, path: 'camera.exposureUs' });
  }
  if (parts.length === 0) {
    const why = model.accuracyVsSnr ? 'the dark-scene SNR could not be estimated' : 'no curve: accuracy not predicted';
    return { check: makeCheck('accuracy', 'warn', null, task.minAccuracy, 'fraction', 'modelId', `${why} (model ${model.id})`), predicted: null };
  }
  const worst = parts.reduce((w, p) => (p.accuracy < w.accuracy ? p : w), parts[0]!);
  const v = againstMin(worst.accuracy, task.minAccuracy, '', 'the task minimum of {}');
  const message = `predicted accuracy ${fmt(worst.accuracy)} (${parts.map((p) => p.text).join('; ')}) ${v.text}`;
  return { check: makeCheck('accuracy', v.ok ? 'pass' : 'fail', worst.accuracy, task.minAccuracy, 'fraction', worst.path, message), predicted: worst.accuracy };
}
