/**
 * Turning a point of the grid into a Candidate, a Candidate into a profile document, and confirming a
 * candidate with the real validator.
 */
import type { Check, Profile } from '../schema/index.js';
import { validate } from '../validate/index.js';
import type { Calibration, ValidationReport } from '../validate/index.js';
import { evaluateIndex, newEvaluation, unpackIndex } from './evaluator.js';
import { OBJECTIVE_TOLERANCE } from './pareto.js';
import type { PlanTables } from './tables.js';
import type { Candidate } from './types.js';

/** The candidate at a packed grid index, with its figures from the fast evaluator. */
export function candidateAt(t: PlanTables, index: number): Candidate {
  const at = unpackIndex(t, index);
  const out = newEvaluation();
  evaluateIndex(t, index, out);
  const memory = t.axes.memoryPartitions[at.p]!;
  return {
    modelId: t.models[at.m]!.model.id,
    camera: {
      focusDistanceM: t.axes.focusDistancesM[at.s]!,
      fNumber: t.axes.fNumbers[at.f]!,
      exposureUs: t.axes.exposuresUs[at.e]!,
      analogGain: t.axes.analogGains[at.g]!,
    },
    memory: { weightBufferKib: memory.weightBufferKib, activationBufferKib: memory.activationBufferKib },
    energyMjPerFrame: out.energyMjPerFrame,
    latencyMs: out.latencyMs,
    predictedAccuracy: Number.isNaN(out.predictedAccuracy) ? null : out.predictedAccuracy,
    worstBlurPx: out.worstBlurPx,
  };
}

export interface ProfileIdentity {
  id: string;
  taskId: string;
  deviceClassId: string;
  name?: string;
  /** Mark the profile as demo data (when planned from demo documents). */
  demoData?: boolean;
}

/** A caution written into every planned profile: the figures are estimates, not a safety case. */
export const PLANNED_PROFILE_CAUTION =
  'Settings chosen by the planner from thin-lens and roofline estimates. Try them on one unit in a safe state, ' +
  "then roll out in stages; the site's risk assessment and robot safety rules decide where and when they apply.";

/** A profile document holding a candidate's settings. */
export function candidateToProfile(candidate: Candidate, identity: ProfileIdentity): Profile {
  const accuracy = candidate.predictedAccuracy === null ? 'not predicted' : candidate.predictedAccuracy.toFixed(3);
  const figures = `Planned figures: ${candidate.energyMjPerFrame.toPrecision(3)} mJ per frame, ${candidate.latencyMs.toPrecision(3)} ms latency, predicted accuracy ${accuracy}, worst blur ${candidate.worstBlurPx.toPrecision(3)} px.`;
  return {
    kind: 'profile',
    id: identity.id,
    ...(identity.name !== undefined ? { name: identity.name } : {}),
    ...(identity.demoData ? { demoData: true } : {}),
    notes: `${identity.demoData ? 'Demo data. ' : ''}${figures} ${PLANNED_PROFILE_CAUTION}`,
    taskId: identity.taskId,
    deviceClassId: identity.deviceClassId,
    modelId: candidate.modelId,
    camera: { ...candidate.camera },
    memory: { ...candidate.memory },
  };
}

function sameFigure(a: number | null, b: number | null): boolean {
  if (a === null || b === null) return a === b;
  return Math.abs(a - b) <= OBJECTIVE_TOLERANCE * Math.max(1, Math.abs(a), Math.abs(b));
}

export interface Confirmation {
  report: ValidationReport;
  failing: Check[];
  /** The validator finds no failing check and the same energy, latency, accuracy and worst blur. */
  agrees: boolean;
}

/** Run the real validator on a candidate of the grid and compare its figures with the fast evaluator's. */
export function confirmCandidate(t: PlanTables, index: number, candidate: Candidate, calibration?: Calibration): Confirmation {
  const { model, network, declaredNetwork } = t.models[unpackIndex(t, index).m]!;
  const profile = candidateToProfile(candidate, { id: 'planned', taskId: t.task.id, deviceClassId: t.deviceClass.id });
  const networks = declaredNetwork ? { network: declaredNetwork, shippedNetwork: network } : { network };
  const report = validate({ profile, task: t.task, deviceClass: t.deviceClass, model, ...networks }, calibration ? { calibration } : {});
  const failing = report.checks.filter((c) => c.status === 'fail');
  const fig = report.figures;
  const worst = fig.blurCurve.reduce((w, p) => (p.totalPx > w ? p.totalPx : w), -Infinity);
  const agrees =
    sameFigure(fig.energy?.totalMj ?? null, candidate.energyMjPerFrame) &&
    sameFigure(fig.latency?.totalMs ?? null, candidate.latencyMs) &&
    sameFigure(fig.predictedAccuracy, candidate.predictedAccuracy) &&
    sameFigure(worst, candidate.worstBlurPx);
  return { report, failing, agrees };
}
