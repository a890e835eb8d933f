import type { Release } from '../../protocol/release.js';
import { actorOf } from '../auth.js';
import { recordChange } from '../audit-log.js';
import { readJson, readQuery } from '../body.js';
import type { ResolvedDeps } from '../context.js';
import { conflict, notFound } from '../errors.js';
import { buildRelease } from '../../release/build.js';
import { releaseQuerySchema, releaseRequestSchema } from '../request-schemas.js';
import type { Router } from '../routing.js';

/** Releases: built from validated revisions, signed with the server's key, stored, and never changed. */
export function registerReleaseRoutes(route: Router, deps: ResolvedDeps): void {
  const { store, signer } = deps;

  route('releases.create', async (c) => {
    const request = await readJson(c, releaseRequestSchema, deps.limits.maxJsonBytes);
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const signed = store.transaction(() => {
      const release = buildRelease(request, { store, blobs: deps.blobs, actor, at });
      const s = signer.sign(release);
      store.releases.insert({ id: release.id, deviceClassId: release.deviceClassId, version: release.version, createdAt: at, createdBy: actor, signed: s });
      recordChange(store, {
        at,
        actor,
        action: 'release.create',
        target: `release/${release.id}`,
        detail: {
          version: release.version,
          deviceClassId: release.deviceClassId,
          tasks: Object.fromEntries(Object.entries(release.tasks).map(([n, t]) => [n, { profileId: t.profileId, revision: t.revision }])),
          keyId: s.keyId,
          override: release.override ?? null,
        },
      });
      return s;
    });
    return c.json(signed, 201);
  });

  route('releases.list', (c) => {
    const q = readQuery(c, releaseQuerySchema);
    const list = store.releases.list(q.deviceClass === undefined ? {} : { deviceClassId: q.deviceClass });
    return c.json(
      list.map((r) => {
        const release = r.parsed.release;
        return {
          id: r.id,
          deviceClassId: r.deviceClassId,
          version: r.version,
          createdAt: r.createdAt,
          createdBy: r.createdBy,
          applyPolicy: release.applyPolicy,
          defaultTask: release.defaultTask,
          tasks: Object.fromEntries(Object.entries(release.tasks).map(([n, t]) => [n, { profileId: t.profileId, revision: t.revision }])),
          overridden: release.override !== undefined,
        };
      }),
    );
  });

  route('releases.read', (c) => {
    const r = store.releases.get(c.req.param('id') ?? '');
    if (!r) throw notFound(`release '${c.req.param('id')}'`);
    // The stored text, byte for byte: what the signature was made over and what devices receive.
    return c.body(r.raw, 200, { 'content-type': 'application/json; charset=UTF-8' });
  });

  for (const key of ['releases.replace', 'releases.patch', 'releases.delete']) {
    route(key, (c) => {
      const id = c.req.param('id') ?? '';
      const exists = store.releases.get(id) !== null;
      throw conflict(
        exists
          ? `release '${id}' is immutable: create a new release instead`
          : `releases are immutable and cannot be written this way; there is no release '${id}' either`,
      );
    });
  }

  route('signing-key', (c) =>
    // ?format=pem gives the bare PEM, ready to save as the agent's --public-key-path file.
    c.req.query('format') === 'pem'
      ? c.body(signer.publicKeyPem, 200, { 'Content-Type': 'application/x-pem-file' })
      : c.json({ algorithm: 'Ed25519', keyId: signer.keyId, publicKeyPem: signer.publicKeyPem }),
  );
}
