import { METRIC_NAMES } from '../../metrics/registry.js';
import { profileSchema, type Profile } from '../../schema/profile.js';
import type { ProfileRevision } from '../../store/profiles.js';
import { checkProfile } from '../../profiles/check.js';
import { diffRevisions } from '../../profiles/diff.js';
import { createProfile, reviseProfile } from '../../profiles/save.js';
import { renderProfilePreview } from '../../profiles/preview.js';
import { createShippedNetworks } from '../../profiles/shipped-networks.js';
import { actorOf } from '../auth.js';
import type { ResolvedDeps } from '../context.js';
import { badRequest, notFound } from '../errors.js';
import { diffQuerySchema, renderPreviewRequestSchema } from '../request-schemas.js';
import { unwrap } from '../refusals.js';
import { requestBody, requestQuery, type Router } from '../routing.js';

function summary(r: ProfileRevision<Profile>) {
  const { report: _report, ...rest } = r;
  return rest;
}

/** Profiles: every save is a new immutable revision carrying its validation report. */
export function registerProfileRoutes(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;
  // A model that takes its network from its weights is costed from its uploaded blob.
  const shipped = createShippedNetworks(deps.blobs);
  const failures = deps.metrics.counter(METRIC_NAMES.validationFailures, 'Profile validations whose report failed');

  function counted<T extends { report: { status: string } }>(result: T, where: 'save' | 'check'): T {
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
    const saved = unwrap(createProfile(profile, { store, shipped, actor: actorOf(c), at: deps.clock.now().toISOString() }));
    return c.json(counted(saved, 'save'), 201);
  });

  route('profiles.update', async (c) => {
    const id = c.req.param('id') ?? '';
    const profile = requestBody(c, profileSchema);
    if (profile.id !== id) throw badRequest("the body's id does not match the path", [{ path: 'id', message: `is '${profile.id}', the path names '${id}'` }]);
    const saved = unwrap(reviseProfile(profile, { store, shipped, actor: actorOf(c), at: deps.clock.now().toISOString() }));
    return c.json(counted(saved, 'save'));
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
    const q = requestQuery(c, diffQuerySchema);
    return c.json(unwrap(diffRevisions(store, c.req.param('id') ?? '', q.from, q.to)));
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
    const { report, refs } = counted(unwrap(checkProfile(store, shipped, profile)), 'check');
    return c.json({ report, refs });
  });
}
