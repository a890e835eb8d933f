import type { Profile } from '../schema/profile.js';
import { refuse, type Outcome } from '../schema/refusal.js';
import type { ProfileRevision } from '../store/profiles.js';
import type { Store } from '../store/store.js';
import { checkProfile, type ProfileRefusalCode } from './check.js';
import type { ShippedNetworks } from './shipped-networks.js';

/** Why a profile save was refused: its inputs (see `checkProfile`), or a clash with what is stored. */
export type ProfileSaveRefusalCode = ProfileRefusalCode | 'profile-exists' | 'profile-not-found';

export interface ProfileSaveContext {
  store: Store;
  /** The networks of models that take theirs from their uploaded weights. */
  shipped: ShippedNetworks;
  actor: string;
  at: string;
}

/**
 * The first revision of a new profile, checked and stored with its report and its audit entry in one
 * transaction. A profile that fails its checks is stored all the same: the report says so.
 */
export function createProfile(profile: Profile, ctx: ProfileSaveContext): Outcome<ProfileRevision<Profile>, ProfileSaveRefusalCode> {
  const { store, actor, at } = ctx;
  const exists = () => refuse('profile-exists', `profile '${profile.id}' already exists; use PUT to save a new revision`);
  if (store.profiles.latest(profile.id)) return exists();
  const checked = checkProfile(store, ctx.shipped, profile);
  if (!checked.ok) return checked;
  const { report, refs } = checked.value;
  return store.transaction(() => {
    const saved = store.profiles.create({ profileId: profile.id, profile, report, refs, actor, at });
    if (!saved) return exists();
    store.audit.record({ at, actor, action: 'profile.create', target: `profile/${profile.id}`, detail: { revision: 1, status: report.status } });
    return { ok: true as const, value: saved };
  });
}

/** A new revision of a stored profile, checked, with its audit entry; earlier revisions never change. */
export function reviseProfile(profile: Profile, ctx: ProfileSaveContext): Outcome<ProfileRevision<Profile>, ProfileSaveRefusalCode> {
  const { store, actor, at } = ctx;
  const id = profile.id;
  if (!store.profiles.latest(id)) return refuse('profile-not-found', `profile '${id}' (use POST to create it) not found`);
  const checked = checkProfile(store, ctx.shipped, profile);
  if (!checked.ok) return checked;
  const { report, refs } = checked.value;
  return store.transaction(() => {
    const saved = store.profiles.addRevision({ profileId: id, profile, report, refs, actor, at });
    if (!saved) return refuse('profile-not-found', `profile '${id}' not found`);
    store.audit.record({ at, actor, action: 'profile.revise', target: `profile/${id}`, detail: { revision: saved.revision, status: report.status } });
    return { ok: true as const, value: saved };
  });
}
