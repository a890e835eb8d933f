import { METRIC_NAMES } from '../../metrics/registry.js';
import { profileSchema, type Profile } from '../../schema/profile.js';
import type { ProfileRevision } from '../../store/profiles.js';
import { actorOf } from '../auth.js';
import { recordChange } from '../audit-log.js';
import type { ResolvedDeps } from '../context.js';
import { badRequest, conflict, notFound } from '../errors.js';
import { diffJson } from '../json-diff.js';
import { checkProfile, type CheckedProfile } from '../../release/profile-inputs.js';
import { createShippedNetworks } from '../../release/shipped-networks.js';
import { diffQuerySchema, renderPreviewRequestSchema } from '../request-schemas.js';
import { renderProfilePreview } from '../../release/profile-preview.js';
import { unwrap } from '../refusals.js';
import { requestBody, requestQuery, type Router } from '../routing.js';

function summary(r: ProfileRevision<Profile>) {
  const { report: _report, ...rest } = r;
  return rest;
}

/** Profiles: every save is a new immutable revision carrying its validation report. */
export function registerProfileRoutes(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;
  const shipped = createShippedNetworks(deps.blobs);
  const failures = deps.metrics.counter(METRIC_NAMES.validationFailures, 'Profile validations whose report failed');

  function checked(profile: Profile, where: 'save' | 'check'): CheckedProfile {
    const result = unwrap(checkProfile(store, shipped, profile));
    if (result.report.status === 'fail') failures.inc({ where });
    return result;
  }

  function revisionParam(raw: string | undefined): number {
    const n = Number(raw);
    if (!Number.isInteger(n) || n < 1) throw badRequest('revision must be a whole number from 1', [{ path: 'revision', message: `got '${raw}'` }]);
    return n;
  }

  route('profiles.list', (c) => c.json(store.profiles.list<Profile>().map(summary)));

  route('profiles.create', async (c) => {
    const profile = requestBody(c, profileSchema);
    if (store.profiles.latest(profile.id)) throw conflict(`profile '${profile.id}' already exists; use PUT to save a new revision`);
    const { report, refs } = checked(profile, 'save');
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const saved = store.transaction(() => {
      const r = store.profiles.create({ profileId: profile.id, profile, report, refs, actor, at });
      if (!r) throw conflict(`profile '${profile.id}' already exists; use PUT to save a new revision`);
      recordChange(store, { at, actor, action: 'profile.create', target: `profile/${profile.id}`, detail: { revision: 1, status: report.status } });
      return r;
    });
    return c.json(saved, 201);
  });

  route('profiles.update', async (c) => {
    const id = c.req.param('id') ?? '';
    const profile = requestBody(c, profileSchema);
    if (profile.id !== id) throw badRequest("the body's id does not match the path", [{ path: 'id', message: `is '${profile.id}', the path names '${id}'` }]);
    if (!store.profiles.latest(id)) throw notFound(`profile '${id}' (use POST to create it)`);
    const { report, refs } = checked(profile, 'save');
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const saved = store.transaction(() => {
      const r = store.profiles.addRevision({ profileId: id, profile, report, refs, actor, at });
      if (!r) throw notFound(`profile '${id}'`);
      recordChange(store, { at, actor, action: 'profile.revise', target: `profile/${id}`, detail: { revision: r.revision, status: report.status } });
      return r;
    });
    return c.json(saved);
  });

  route('profiles.read', (c) => {
    const r = store.profiles.latest(c.req.param('id') ?? '');
    if (!r) throw notFound(`profile '${c.req.param('id')}'`);
    return c.json(r);
  });

  route('profiles.revisions', (c) => {
    const all = store.profiles.revisions<Profile>(c.req.param('id') ?? '');
    if (all.length === 0) throw notFound(`profile '${c.req.param('id')}'`);
    return c.json(all.map(summary));
  });

  route('profiles.revision', (c) => {
    const id = c.req.param('id') ?? '';
    const n = revisionParam(c.req.param('revision'));
    const r = store.profiles.revision(id, n);
    if (!r) throw notFound(`revision ${n} of profile '${id}'`);
    return c.json(r);
  });

  route('profiles.diff', (c) => {
    const id = c.req.param('id') ?? '';
    const q = requestQuery(c, diffQuerySchema);
    const from = store.profiles.revision(id, q.from);
    const to = store.profiles.revision(id, q.to);
    if (!from) throw notFound(`revision ${q.from} of profile '${id}'`);
    if (!to) throw notFound(`revision ${q.to} of profile '${id}'`);
    return c.json({
      profileId: id,
      from: q.from,
      to: q.to,
      status: { from: from.status, to: to.status },
      changes: diffJson(from.profile, to.profile),
    });
  });

  // The sample image is rendered as `ocellus render` renders it; the figures travel in a header beside the PNG.
  route('render-preview', async (c) => {
    const body = requestBody(c, renderPreviewRequestSchema);
    const preview = unwrap(
      await renderProfilePreview(store, {
        profile: body.profile,
        image: Buffer.from(body.image, 'base64'),
        distanceM: body.distanceM,
        ...(body.luminanceCdM2 !== undefined ? { luminanceCdM2: body.luminanceCdM2 } : {}),
        ...(body.seed !== undefined ? { seed: body.seed } : {}),
      }),
    );
    return c.body(new Uint8Array(preview.png), 200, {
      'content-type': 'image/png',
      'cache-control': 'no-store',
      'x-ocellus-preview': JSON.stringify({ inputPx: preview.inputPx, ...preview.psf }),
    });
  });

  route('validate', async (c) => {
    const profile = requestBody(c, profileSchema);
    const { report, refs } = checked(profile, 'check');
    return c.json({ report, refs });
  });
}
