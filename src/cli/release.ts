import type { SignedRelease } from '../protocol/release.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { ApiError } from '../api-client/api-client.js';
import { CLIENT_FLAGS, createServerClient, reportServerError } from './server-client.js';

export const usage = `usage: ocellus release create --device-class D --task name=profileId[@revision]... [--default-task T]
                              [--policy when-idle|immediate] [--override-reason R] [--server URL] [--token T] [--json]
       ocellus release reissue RELEASE_ID [--server URL] [--token T] [--json]
  Asks the server to build and sign a release for one device class from saved profile revisions (the latest
  revision when @revision is left out). The default task is the first --task unless --default-task names
  another. The apply policy is when-idle unless --policy says immediate: devices then defer the release while
  the robot reports that it moves. A revision whose checks fail is refused unless --override-reason gives why
  it must go out anyway; the reason and who gave it are signed into the release.
  Caution: a release changes what robots see. Try it on one unit first, roll out in stages, and follow the
  site's risk assessment and robot safety rules.
  reissue goes back to an older release: devices never apply a lower sequence number than they have, so
  the server makes a NEW release with the next number and the old one's content (weights by hash), to assign.
  Exit 0 when the release was made, 1 when checks fail, 2 for bad input or a refusal.
`;

const TASK_ARG = /^([a-z0-9][a-z0-9._-]{0,63})=([a-z0-9][a-z0-9._-]{0,63})(?:@(\d+))?$/;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(
      args,
      {
        ...CLIENT_FLAGS,
        'device-class': { type: 'string' },
        task: { type: 'string', multiple: true },
        'default-task': { type: 'string' },
        policy: { type: 'string' },
        'override-reason': { type: 'string' },
      },
      true,
    );
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals[0] === 'reissue') {
      if (positionals.length !== 2) throw new UsageError('name the release to re-issue: ocellus release reissue RELEASE_ID');
      const client = createServerClient(values, io);
      try {
        const signed = await client.json<SignedRelease>('POST', `/api/v1/releases/${encodeURIComponent(positionals[1]!)}/reissue`);
        if (values.json) printJson(io, signed);
        else {
          const r = signed.release;
          io.stdout(`release ${r.id}: version ${r.version} of ${r.deviceClassId}, the content of ${r.reissueOf?.releaseId} (version ${r.reissueOf?.version}), expires ${r.expiresAt}
`);
          io.stdout('Caution: try this release on one unit first and roll it out in stages.\n');
        }
        return EXIT_OK;
      } catch (e) {
        if (e instanceof ApiError) return reportServerError(io, e);
        throw e;
      }
    }
    if (positionals[0] !== 'create' || positionals.length > 1) throw new UsageError(`expected 'release create' or 'release reissue ID', got 'release ${positionals.join(' ')}'`);
    const deviceClassId = values['device-class'];
    if (!deviceClassId) throw new UsageError('missing --device-class');
    const taskArgs = values.task ?? [];
    if (taskArgs.length === 0) throw new UsageError('give at least one --task name=profileId[@revision]');
    const policy = values.policy ?? 'when-idle';
    if (policy !== 'when-idle' && policy !== 'immediate') throw new UsageError(`--policy must be when-idle or immediate, got '${policy}'`);
    const client = createServerClient(values, io);
    try {
      const tasks: Record<string, { profileId: string; revision: number }> = {};
      for (const arg of taskArgs) {
        const m = TASK_ARG.exec(arg);
        if (!m) throw new UsageError(`--task must look like name=profileId or name=profileId@3, got '${arg}'`);
        const [, name, profileId, rev] = m as unknown as [string, string, string, string | undefined];
        if (Object.hasOwn(tasks, name)) throw new UsageError(`task '${name}' is given twice`);
        const revision = rev !== undefined ? Number(rev) : (await client.json<{ revision: number }>('GET', `/api/v1/profiles/${profileId}`)).revision;
        tasks[name] = { profileId, revision };
      }
      const body = {
        deviceClassId,
        tasks,
        defaultTask: values['default-task'] ?? Object.keys(tasks)[0]!,
        applyPolicy: policy,
        ...(values['override-reason'] !== undefined ? { override: { reason: values['override-reason'] } } : {}),
      };
      const signed = await client.json<SignedRelease>('POST', '/api/v1/releases', body);
      if (values.json) printJson(io, signed);
      else {
        const r = signed.release;
        io.stdout(`release ${r.id}: version ${r.version} of ${r.deviceClassId}, apply ${r.applyPolicy}, default task ${r.defaultTask}, signed by key ${signed.keyId}\n`);
        for (const [name, t] of Object.entries(r.tasks)) {
          io.stdout(`  ${name}: profile ${t.profileId} revision ${t.revision}, model ${t.model.id} ${t.model.version}, predicted ${t.predicted.frameLatencyMs.toFixed(1)} ms and ${t.predicted.frameEnergyMj.toFixed(3)} mJ per frame\n`);
        }
        if (r.override) io.stdout(`  OVERRIDE of failing checks by ${r.override.by}: ${r.override.reason}\n`);
        io.stdout('Caution: try this release on one unit first and roll it out in stages.\n');
      }
      return EXIT_OK;
    } catch (e) {
      if (e instanceof ApiError) return reportServerError(io, e);
      throw e;
    }
  });
}
