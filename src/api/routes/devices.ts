import { assignRelease } from '../../fleet/rollout/assign.js';
import type { DeviceRecord } from '../../store/devices.js';
import { actorOf } from '../auth.js';
import { recordChange } from '../audit-log.js';
import { readJson, readQuery } from '../body.js';
import type { ResolvedDeps } from '../context.js';
import { badRequest, conflict, notFound } from '../errors.js';
import { assignRequestSchema, deviceQuerySchema, enrolRequestSchema } from '../request-schemas.js';
import { refusalError } from '../refusals.js';
import type { Router } from '../routing.js';

/** Shown with every assignment: the API sends settings to a robot, so the caution travels with the answer. */
export const ASSIGN_CAUTION =
  'New camera and compute settings change what the robot sees. Try a release on one unit first, roll out in stages, ' +
  "let devices apply it only in safe states (apply policy 'when-idle'), and follow the site's risk assessment and robot safety rules.";

/** Devices: enrolment (credentials shown once), listing, and manual release assignment. */
export function registerDeviceRoutes(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;
  const drift = store.drift;

  function view(d: DeviceRecord) {
    const state = store.deviceStates.get(d.id);
    // reportedState: the device's latest state message (active task, applied and pending release), for fleet lists.
    return { ...d, online: state?.online ?? false, lastSeenAt: state?.lastSeenAt ?? null, reportedState: state?.state ?? null };
  }

  route('devices.enrol', async (c) => {
    const body = await readJson(c, enrolRequestSchema, deps.limits.maxJsonBytes);
    if (!store.documents.latest('device-class', body.deviceClassId)) {
      throw badRequest('unknown device class', [{ path: 'deviceClassId', message: `no device class '${body.deviceClassId}' is stored` }]);
    }
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const tags = [...new Set(body.tags)];
    const enrolled = store.transaction(() => {
      const e = store.devices.enrol({ id: body.id, deviceClassId: body.deviceClassId, tags, actor, at });
      if (!e) throw conflict(`device '${body.id}' is already enrolled`);
      recordChange(store, { at, actor, action: 'device.enrol', target: `device/${body.id}`, detail: { deviceClassId: body.deviceClassId, tags } });
      return e;
    });
    return c.json({ device: view(enrolled.device), mqtt: { username: enrolled.device.id, password: enrolled.password } }, 201);
  });

  route('devices.list', (c) => {
    const q = readQuery(c, deviceQuerySchema);
    const filter = { ...(q.class !== undefined ? { deviceClassId: q.class } : {}), ...(q.tag !== undefined ? { tag: q.tag } : {}) };
    let list = store.devices.list(filter).map(view);
    if (q.online !== undefined) list = list.filter((d) => d.online === (q.online === 'true'));
    return c.json(list);
  });

  route('devices.read', (c) => {
    const id = c.req.param('id') ?? '';
    const device = store.devices.get(id);
    if (!device) throw notFound(`device '${id}'`);
    const assigned = device.assignedReleaseId ? store.releases.get(device.assignedReleaseId) : null;
    return c.json({
      ...view(device),
      assignedRelease: assigned ? { id: assigned.id, version: assigned.version, deviceClassId: assigned.deviceClassId } : null,
      reported: store.deviceStates.get(id),
      assignments: store.devices.assignments(id),
      // Newest first: episodes where this device's measured ÷ predicted ratio left its class's.
      drift: drift.list({ deviceId: id, limit: 20 }),
    });
  });

  route('devices.assign', async (c) => {
    const id = c.req.param('id') ?? '';
    const body = await readJson(c, assignRequestSchema, deps.limits.maxJsonBytes);
    const result = await assignRelease(store, deps.publisher, {
      deviceId: id,
      releaseId: body.releaseId,
      actor: actorOf(c),
      cause: 'manual',
      at: deps.clock.now().toISOString(),
    });
    if (!result.ok) throw refusalError(result);
    return c.json({
      assignment: result.assignment,
      release: { id: result.release.parsed.release.id, version: result.release.parsed.release.version, applyPolicy: result.release.parsed.release.applyPolicy },
      publish: result.publish,
      caution: ASSIGN_CAUTION,
    });
  });
}
