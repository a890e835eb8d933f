import { actorOf } from '../auth.js';
import type { ResolvedDeps } from '../context.js';
import { conflict, notFound } from '../errors.js';
import { createRelease } from '../../release/create.js';
import { reissueRelease } from '../../release/reissue.js';
import { releaseRequestSchema } from '../../release/request.js';
import { releaseQuerySchema } from '../request-schemas.js';
import { unwrap } from '../refusals.js';
import { requestBody, requestQuery, type Router } from '../routing.js';

const JSON_TYPE = 'application/json';

/** Releases: built from validated revisions, signed with the server's key, stored, and never changed. */
export function registerReleaseRoutes(route: Router, deps: ResolvedDeps): void {
  const { store, signer } = deps;

  route('releases.create', async (c) => {
    const request = requestBody(c, releaseRequestSchema);
    const stored = unwrap(createRelease(request, { store, blobs: deps.blobs, signer, actor: actorOf(c), at: deps.clock.now().toISOString() }));
    return c.body(stored.raw, 201, { 'content-type': JSON_TYPE });
  });

  route('releases.reissue', (c) => {
    const at = deps.clock.now().toISOString();
    const id = c.req.param('id') ?? '';
    const stored = unwrap(reissueRelease(id, { store, blobs: deps.blobs, signer, actor: actorOf(c), at }));
    return c.body(stored.raw, 201, { 'content-type': JSON_TYPE });
  });

  route('releases.list', (c) => {
    const q = requestQuery(c, releaseQuerySchema);
    const list = store.releases.list(q.deviceClass === undefined ? {} : { deviceClassId: q.deviceClass });
    // Robots per release: those whose own latest report says it is applied (online or not), and those assigned it.
    const applied = new Map<string, { online: number; offline: number }>();
    for (const s of store.deviceStates.list()) {
      if (!s.releaseId) continue;
      const n = applied.get(s.releaseId) ?? { online: 0, offline: 0 };
      if (s.online) n.online += 1;
      else n.offline += 1;
      applied.set(s.releaseId, n);
    }
    const assigned = new Map<string, number>();
    for (const d of store.devices.list()) if (d.assignedReleaseId) assigned.set(d.assignedReleaseId, (assigned.get(d.assignedReleaseId) ?? 0) + 1);
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
          format: release.format,
          expiresAt: release.expiresAt ?? null,
          reissueOf: release.reissueOf ?? null,
          robots: { applied: applied.get(r.id) ?? { online: 0, offline: 0 }, assigned: assigned.get(r.id) ?? 0 },
        };
      }),
    );
  });

  route('releases.read', (c) => {
    const r = store.releases.get(c.req.param('id') ?? '');
    if (!r) throw notFound(`release '${c.req.param('id')}'`);
    // The stored text, byte for byte: what the signature was made over and what devices receive.
    return c.body(r.raw, 200, { 'content-type': JSON_TYPE });
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
