import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { ApiError } from '../api-client/api-client.js';
import { CLIENT_FLAGS, createServerClient, reportServerError } from './server-client.js';

export const usage = `usage: ocellus device enrol ID --class D [--tag T]... [--server URL] [--token T] [--json]
       ocellus device assign ID --release R [--server URL] [--token T] [--json]
       ocellus device list [--class D] [--tag T] [--server URL] [--token T] [--json]
  enrol   registers a robot and prints its MQTT user name and password once (only a hash is kept).
  assign  records that one device should run a release and sends it over the bus; the device applies it
          following the release's apply policy. Try a release on one unit before a wider rollout.
  list    lists enrolled devices with what they are assigned.
`;

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
      throw new UsageError(`expected 'device enrol', 'device assign' or 'device list', got '${verb ?? ''}'`);
    } catch (e) {
      if (e instanceof ApiError) return reportServerError(io, e);
      throw e;
    }
  });
}
