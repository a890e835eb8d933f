import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { ApiError } from '../api-client/api-client.js';
import { CLIENT_FLAGS, createServerClient, reportServerError } from './server-client.js';

export const usage = `usage: ocellus device enrol ID --class D [--tag T]... [--server URL] [--token T] [--json]
       ocellus device assign ID --release R [--server URL] [--token T] [--json]
       ocellus device list [--class D] [--tag T] [--server URL] [--token T] [--json]
       ocellus device rotate-password ID [--server URL] [--token T] [--json]
       ocellus device revoke ID [--server URL] [--token T] [--json]
  enrol   registers a robot and prints its MQTT user name and password once (only a keyed hash is kept).
  assign  records that one device should run a release and sends it over the bus; the device applies it
          following the release's apply policy. Try a release on one unit before a wider rollout.
  list    lists enrolled devices with what they are assigned.
  rotate-password  issues a new MQTT password (printed once), ends the device's live session; the old
          password stops working at once and a revoked device is reinstated. The robot stays offline until
          its agent has the new password: do it while it is parked.
  revoke  refuses the device's credentials from now on and ends its live session at once (its last will
          marks it offline). Stopping a robot's link can stop what it does: follow the site's procedures.
`;

const SESSION_TEXT: Record<string, string> = {
  closed: 'its live session was closed',
  none: 'it had no live session',
  'external-broker': 'end its session on the external broker too (and update its password file)',
  'no-bus': 'the server runs without a bus',
};

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(
      args,
      { ...CLIENT_FLAGS, class: { type: 'string' }, tag: { type: 'string', multiple: true }, release: { type: 'string' } },
      true,
    );
    if (values.help) return io.stdout(usage), EXIT_OK;
    const [verb, id, ...extra] = positionals;
    if (extra.length > 0) throw new UsageError(`unexpected arguments: ${extra.join(' ')}`);
    const client = createServerClient(values, io);
    try {
      if (verb === 'enrol') {
        if (!id) throw new UsageError('give the device id: ocellus device enrol ID --class D');
        if (!values.class) throw new UsageError('missing --class');
        const r = await client.json<{ device: { id: string }; mqtt: { username: string; password: string } }>('POST', '/api/v1/devices', {
          id,
          deviceClassId: values.class,
          tags: values.tag ?? [],
        });
        if (values.json) printJson(io, r);
        else {
          io.stdout(`device ${r.device.id} enrolled\nmqtt username: ${r.mqtt.username}\nmqtt password: ${r.mqtt.password}\n`);
          io.stderr('the password is shown only once: put it in the device agent\'s configuration now\n');
        }
        return EXIT_OK;
      }
      if (verb === 'assign') {
        if (!id) throw new UsageError('give the device id: ocellus device assign ID --release R');
        if (!values.release) throw new UsageError('missing --release');
        const r = await client.json<{ release: { id: string; version: number; applyPolicy: string }; publish: { status: string; reason?: string }; caution: string }>(
          'POST',
          `/api/v1/devices/${encodeURIComponent(id)}/assign`,
          { releaseId: values.release },
        );
        if (values.json) printJson(io, r);
        else {
          const sent = r.publish.status === 'sent' ? 'sent to the device' : `recorded, not sent: ${r.publish.reason}`;
          io.stdout(`device ${id}: release ${r.release.id} (version ${r.release.version}, apply ${r.release.applyPolicy}) ${sent}\nCaution: ${r.caution}\n`);
        }
        return EXIT_OK;
      }
      if (verb === 'list') {
        if (id) throw new UsageError(`unexpected argument: ${id}`);
        const q = new URLSearchParams();
        if (values.class) q.set('class', values.class);
        if (values.tag?.[0]) q.set('tag', values.tag[0]);
        const list = await client.json<Array<{ id: string; deviceClassId: string; tags: string[]; assignedReleaseId: string | null; online: boolean | null }>>(
          'GET',
          `/api/v1/devices${q.size ? `?${q}` : ''}`,
        );
        if (values.json) printJson(io, list);
        else {
          for (const d of list) {
            const online = d.online === null ? 'online unknown' : d.online ? 'online' : 'offline';
            io.stdout(`${d.id}  ${d.deviceClassId}  ${online}  release ${d.assignedReleaseId ?? '-'}  ${d.tags.join(',')}\n`);
          }
          io.stdout(`${list.length} devices\n`);
        }
        return EXIT_OK;
      }
      if (verb === 'rotate-password') {
        if (!id) throw new UsageError('give the device id: ocellus device rotate-password ID');
        const r = await client.json<{ mqtt: { username: string; password: string }; session: string }>('POST', `/api/v1/devices/${encodeURIComponent(id)}/rotate-password`);
        if (values.json) printJson(io, r);
        else {
          io.stdout(`device ${id}: new password issued; ${SESSION_TEXT[r.session] ?? r.session}\nmqtt username: ${r.mqtt.username}\nmqtt password: ${r.mqtt.password}\n`);
          io.stderr('the password is shown only once: put it in the device agent\'s password file now\n');
        }
        return EXIT_OK;
      }
      if (verb === 'revoke') {
        if (!id) throw new UsageError('give the device id: ocellus device revoke ID');
        const r = await client.json<{ device: { revokedAt: string }; session: string }>('POST', `/api/v1/devices/${encodeURIComponent(id)}/revoke`);
        if (values.json) printJson(io, r);
        else io.stdout(`device ${id}: credentials revoked at ${r.device.revokedAt}; ${SESSION_TEXT[r.session] ?? r.session}\n`);
        return EXIT_OK;
      }
      throw new UsageError(`expected 'device enrol', 'device assign', 'device list', 'device rotate-password' or 'device revoke', got '${verb ?? ''}'`);
    } catch (e) {
      if (e instanceof ApiError) return reportServerError(io, e);
      throw e;
    }
  });
}
