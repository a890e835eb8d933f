import type { Report } from '../schema/report.js';
import { refuse, type Outcome } from '../schema/refusal.js';
import type { Store } from '../store/store.js';
import { diffJson, type FieldChange } from '../documents/json-diff.js';

export type ProfileDiffRefusalCode = 'revision-not-found';

export interface RevisionDiff {
  profileId: string;
  from: number;
  to: number;
  status: { from: Report['status']; to: Report['status'] };
  changes: FieldChange[];
}

/** Field-level changes between two stored revisions of one profile, and how their check status moved. */
export function diffRevisions(store: Store, profileId: string, from: number, to: number): Outcome<RevisionDiff, ProfileDiffRefusalCode> {
  const a = store.profiles.revision(profileId, from);
  const b = store.profiles.revision(profileId, to);
  if (!a) return refuse('revision-not-found', `revision ${from} of profile '${profileId}' not found`);
  if (!b) return refuse('revision-not-found', `revision ${to} of profile '${profileId}' not found`);
  return {
    ok: true,
    value: { profileId, from, to, status: { from: a.status, to: b.status }, changes: diffJson(a.profile, b.profile) },
  };
}
