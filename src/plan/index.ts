export { plan } from './plan.js';
export { candidateToProfile, PLANNED_PROFILE_CAUTION } from './candidate.js';
export type { ProfileIdentity } from './candidate.js';
export { paretoFront, compareObjectives, OBJECTIVE_TOLERANCE } from './pareto.js';
export type { Objectives } from './pareto.js';
export { startingFocusM, refinedFocusM, goldenSectionMin } from './focus.js';
export { geometricLadder, gainLadder, memoryPartitions } from './ladders.js';
export { FOCUS_STEPS_PER_M, worstTotalBlurPx } from './search-space.js';
export { FAIL_CODES } from './codes.js';
export { DEFAULT_PLAN_OPTIONS } from './types.js';
export type {
  Candidate,
  CandidateCamera,
  CandidateMemory,
  ModelCandidate,
  NearMiss,
  PlanInput,
  PlanOptions,
  PlanResult,
  SearchAxes,
  SkippedModel,
} from './types.js';
