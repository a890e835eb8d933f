import { createRolloutService, ROLLOUT_CAUTION } from '../../fleet/rollout/service.js';
import { rolloutRequestSchema } from '../../fleet/rollout/spec.js';
import { rolloutQuerySchema } from '../../fleet/queries.js';
import { reissueRelease } from '../../release/reissue.js';
import { actorOf } from '../auth.js';
import { readJson, readQuery } from '../body.js';
import type { ResolvedDeps } from '../context.js';
import { HttpError } from '../errors.js';
import { unwrap } from '../refusals.js';
import type { Router } from '../routing.js';
import { withWaveNumbers } from './wave-numbers.js';


/**
 * Rollouts: a release sent to a set of devices in waves, each wave passing its gate before the next starts.
 * The routes only change the stored rollout; the fleet's rollout engine does the assigning on its next tick.
 */
export function registerRolloutRoutes(route: Router, deps: ResolvedDeps): void {
  const service = createRolloutService(deps.store, {
    reissue: function reissue(releaseId, actor, at) {
      const r = reissueRelease(releaseId, { store: deps.store, blobs: deps.blobs, signer: deps.signer, actor, at });
      return r.ok ? { ok: true, releaseId: r.value.id } : { ok: false, message: r.message, issues: r.issues };
    },
  });
  const now = () => deps.clock.now().toISOString();

  route('rollouts.create', async (c) => {
    const request = await readJson(c, rolloutRequestSchema, deps.limits.maxJsonBytes);
    const rollout = unwrap(service.create(request, actorOf(c), now()));
    return c.json({ ...withWaveNumbers(rollout), caution: ROLLOUT_CAUTION }, 201);
  });

  route('rollouts.list', (c) => {
    const q = readQuery(c, rolloutQuerySchema);
    return c.json(service.list({ ...(q.status ? { status: q.status } : {}), ...(q.limit ? { limit: q.limit } : {}) }).map(withWaveNumbers));
  });

  route('rollouts.read', (c) => {
    const id = c.req.param('id') ?? '';
    const rollout = service.view(id);
    if (!rollout) throw new HttpError(404, `rollout '${id}' not found`);
    return c.json(withWaveNumbers(rollout));
  });

  for (const verb of ['pause', 'resume', 'abort', 'rollback'] as const) {
    route(`rollouts.${verb}`, (c) => {
      const rollout = unwrap(service[verb](c.req.param('id') ?? '', actorOf(c), now()));
      const shown = withWaveNumbers(rollout);
      return c.json(verb === 'resume' || verb === 'rollback' ? { ...shown, caution: ROLLOUT_CAUTION } : shown);
    });
  }
}
