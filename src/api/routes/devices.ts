import type { Context } from 'hono';
import { assignRelease } from '../../fleet/rollout/assign.js';
import type { DeviceRecord } from '../../store/devices.js';
import { actorOf } from '../auth.js';
import { enrolDevice, revokeDevice, rotateDevicePassword } from '../../fleet/enrolment/credentials.js';
import type { AppEnv, ResolvedDeps } from '../context.js';
import { notFound } from '../errors.js';
import { assignRequestSchema, deviceQuerySchema, enrolRequestSchema } from '../request-schemas.js';
import { refusalError, unwrap } from '../refusals.js';
import { requestBody, requestQuery, type Router } from '../routing.js';

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

  function changeContext(c: Context<AppEnv>) {
    return { store, actor: actorOf(c), at: deps.clock.now().toISOString() };
  }

  route('devices.enrol', async (c) => {
    const body = requestBody(c, enrolRequestSchema);
    const enrolled = unwrap(enrolDevice(body, changeContext(c)));
    return c.json({ device: view(enrolled.device), mqtt: { username: enrolled.device.id, password: enrolled.password } }, 201);
  });

  route('devices.list', (c) => {
    const q = requestQuery(c, deviceQuerySchema);
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

  /** Ends the device's live session, so old credentials or a revoked device are not left connected. */
  async function endSession(deviceId: string): Promise<'closed' | 'none' | 'external-broker' | 'no-bus'> {
    return deps.sessions ? deps.sessions.disconnect(deviceId) : 'no-bus';
  }

  route('devices.rotate-password', async (c) => {
    const id = c.req.param('id') ?? '';
    const rotated = unwrap(rotateDevicePassword(id, changeContext(c)));
    const session = await endSession(id);
    return c.json({ device: view(rotated.device), mqtt: { username: id, password: rotated.password }, session });
  });

  route('devices.revoke', async (c) => {
    const id = c.req.param('id') ?? '';
    const revoked = unwrap(revokeDevice(id, changeContext(c)));
    const session = await endSession(id);
    return c.json({ device: view(revoked), session });
  });

  route('devices.assign', async (c) => {
    const id = c.req.param('id') ?? '';
    const body = requestBody(c, assignRequestSchema);
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
