/**
 * Hands a candidate from the planner to the profile editor: kept in sessionStorage under the profile's id
 * until the editor takes it, so a reload of the editor does not lose it and nothing reaches the server
 * until the person saves.
 */
import type { Candidate, Profile } from '../../api-client/response-types.js';
import { focusDistanceM } from './format.js';

const PREFIX = 'ocellus.console.planned.';

/** Why the settings are on screen: the candidate and where it came from. */
export interface PlannedDraft {
  candidate: Candidate;
  /** 1-based position on the front as the planner page listed it. */
  rank: number;
  /** The calibration the search applied (measured ÷ predicted), or null when it used the plain estimates. */
  calibrated: boolean;
}

export function offerPlannedDraft(profileId: string, draft: PlannedDraft): void {
  sessionStorage.setItem(PREFIX + profileId, JSON.stringify(draft));
}

/** The draft offered for this profile, removed as it is taken; null when there is none or it is unreadable. */
export function takePlannedDraft(profileId: string): PlannedDraft | null {
  try {
    const raw = sessionStorage.getItem(PREFIX + profileId);
    sessionStorage.removeItem(PREFIX + profileId);
    return raw ? (JSON.parse(raw) as PlannedDraft) : null;
  } catch {
    return null;
  }
}

const sig = (v: number) => Number(v.toPrecision(3)).toString();

/**
 * A profile's next revision holding a candidate's model, camera settings and memory split; its identity
 * (id, task, device class, name, demo marking) stays the base revision's. The notes say where the settings
 * came from, since the base revision's notes explained other settings.
 */
export function plannedProfile(base: Profile, candidate: Candidate): Profile {
  const focusM = focusDistanceM(candidate.camera.focusDistanceM);
  const rounded = focusM !== candidate.camera.focusDistanceM;
  const accuracy = candidate.predictedAccuracy === null ? 'not predicted' : candidate.predictedAccuracy.toFixed(3);
  const notes =
    `${base.demoData ? 'Demo data. ' : ''}Settings from the planner: ${sig(candidate.energyMjPerFrame)} mJ per frame, ` +
    `${sig(candidate.latencyMs)} ms latency, predicted accuracy ${accuracy}, worst blur ${sig(candidate.worstBlurPx)} px. ` +
    (rounded ? `Focus ${focusM} m (the planner's ${Number(candidate.camera.focusDistanceM.toPrecision(5))} m, rounded). ` : '') +
    'Estimates: try on one unit in a safe state before a staged rollout.';
  return {
    ...base,
    modelId: candidate.modelId,
    // The editor's field shows what will be saved, so the focus is handed over at the precision a person sets it.
    camera: { ...candidate.camera, focusDistanceM: focusDistanceM(candidate.camera.focusDistanceM) },
    memory: { ...candidate.memory },
    notes,
  };
}
