import type { Check, DeviceClass, Model, Network, Task } from '../schema/index.js';
import type { Calibration } from '../validate/index.js';

/** One model the planner may choose, with the network it runs. */
export interface ModelCandidate {
  model: Model;
  /** The declared network document. */
  network: Network;
  /** The network read from the model's weights, when the model takes its network from them (`networkFrom: "weights"`): it is the one costed. */
  shippedNetwork?: Network;
  /** Why the weights gave no network; the model is then skipped with this reason. */
  shippedNetworkProblem?: string;
}

/** How the search space is laid out. Every field has a default; see DEFAULT_PLAN_OPTIONS. */
export interface PlanOptions {
  /** Exposure times to try, µs. Default: a geometric ladder from `minExposureUs` to the frame period. */
  exposuresUs?: number[];
  /** Shortest exposure of the default ladder, µs. */
  minExposureUs?: number;
  /** Rungs per doubling of the default exposure ladder (2 gives half-stop steps). */
  exposureStepsPerOctave?: number;
  /** Analog gains to try. Default: 1, 2, 4 … up to the sensor's maximum. */
  analogGains?: number[];
  /** f-numbers to try. Default: every stop of the lens. Values outside the lens's stops are dropped. */
  fNumbers?: number[];
  /**
   * Extra focus distances either side of the best one, as fractions of it (0.05 adds −5 % and +5 %).
   * Default none: the worst blur only grows away from the best focus.
   */
  focusSpread?: number[];
  /** Weight-buffer step, KiB. */
  granuleKib?: number;
  /** Also try activation buffers smaller than the rest of SRAM, in whole granules. */
  everyActivationSize?: boolean;
  /** Near misses to return; they are returned whenever the front is empty, and otherwise only when this is set. */
  nearMisses?: number;
  /** Inference calibration from real units, applied as the validator applies it. */
  calibration?: Calibration;
  /** Refuse to search more than this many candidates (a guard against a runaway grid). */
  maxCandidates?: number;
}

export interface PlanInput {
  task: Task;
  deviceClass: DeviceClass;
  candidates: ModelCandidate[];
  options?: PlanOptions;
}

export interface CandidateCamera {
  focusDistanceM: number;
  fNumber: number;
  exposureUs: number;
  analogGain: number;
}

export interface CandidateMemory {
  weightBufferKib: number;
  activationBufferKib: number;
}

/** One point of the search space with the figures the planner ranks it by. */
export interface Candidate {
  modelId: string;
  camera: CandidateCamera;
  memory: CandidateMemory;
  energyMjPerFrame: number;
  latencyMs: number;
  /** null when the model has no accuracy curve the validator can use (ranked as 0). */
  predictedAccuracy: number | null;
  worstBlurPx: number;
}

export interface NearMiss {
  candidate: Candidate;
  /** The validator's failing checks for this candidate. */
  failing: Check[];
}

export interface SkippedModel {
  modelId: string;
  reason: string;
}

export interface PlanResult {
  /** Feasible, non-dominated candidates (energy ↓, accuracy ↑, latency ↓), by energy then latency. */
  front: Candidate[];
  /** The best infeasible candidates with the checks they fail (when the front is empty, or on request). */
  nearMisses: NearMiss[];
  /** Candidates evaluated (the full grid over the models not skipped). */
  evaluated: number;
  /** Check codes that fail, most often first (when no model could be searched: why the models were skipped). */
  bindingConstraints: string[];
  /** How many evaluated candidates fail each check code. */
  failCounts: Record<string, number>;
  /**
   * Feasible candidates the fast evaluator found but the validator refused (left out of the front).
   * 0 unless the evaluator and the validator disagree.
   */
  unconfirmed: number;
  /** Models left out of the search, with the reason. */
  skipped: SkippedModel[];
  /** The axes searched, for display. */
  searched: SearchAxes;
}

export interface SearchAxes {
  modelIds: string[];
  focusDistancesM: number[];
  fNumbers: number[];
  exposuresUs: number[];
  analogGains: number[];
  memoryPartitions: CandidateMemory[];
}

export interface ResolvedPlanOptions {
  minExposureUs: number;
  exposureStepsPerOctave: number;
  focusSpread: number[];
  granuleKib: number;
  everyActivationSize: boolean;
  nearMisses: number;
  maxCandidates: number;
}

export const DEFAULT_PLAN_OPTIONS: ResolvedPlanOptions = {
  minExposureUs: 50,
  exposureStepsPerOctave: 2,
  focusSpread: [],
  granuleKib: 64,
  everyActivationSize: false,
  nearMisses: 5,
  maxCandidates: 50_000_000,
};
