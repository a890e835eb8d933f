import type { RolloutView } from '../fleet/rollout/service.js';
import type { RolloutRequestInput, WaveSize } from '../fleet/rollout/spec.js';
import { guard, parseFlags, printJson, toNumber, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { ApiError, type ApiClient } from '../api-client/api-client.js';
import { CLIENT_FLAGS, createServerClient, reportServerError } from './server-client.js';

export const usage = `usage: ocellus rollout create --release R (--device ID ... | [--class C] [--tag T ...]) [--waves 1,10%]
                              [--apply-timeout-s 600] [--telemetry-frames 300] [--telemetry-timeout-s 900]
                              [--latency-tolerance 0.25] [--offline-wait-s 300] [--offline fail|skip] [--note TEXT]
       ocellus rollout status [ID]
       ocellus rollout pause|resume|abort|rollback ID
  (every form takes --server URL, --token T and --json)
  create    sends a release to its devices in waves: by default one canary device, then 10 %, then the rest.
            A wave passes its gate when each device reports the release applied in time, none refused it and
            their measured inference latency stays within the tolerance of the (calibrated) prediction after
            the given number of telemetry frames; a failed gate pauses the rollout with the devices and reasons.
  status    one rollout with its waves and devices, or (without ID) the list of rollouts.
  resume    runs a paused rollout again after the devices were fixed; its failed devices are judged anew.
  abort     stops assigning; devices keep what they run.  rollback  gives every moved device its previous release.
  Caution: new settings change what a robot sees. Keep the canary on a unit you can watch, prefer apply policy
  'when-idle', and follow the site's risk assessment and robot safety rules.
`;

function waveSizes(raw: string): WaveSize[] {
  return raw.split(',').map((part) => {
    const p = part.trim();
    if (/^\d+(\.\d+)?%$/.test(p)) return p;
    return toNumber('waves', p, { integer: true });
  });
}

function describe(r: RolloutView): string {
  const out = [`rollout ${r.id}: ${r.status}, release ${r.releaseId} (${r.deviceClassId}), wave ${r.currentWave} of ${r.waveCount}, by ${r.createdBy}`];
  for (const w of r.waves) {
    const counts = Object.entries(w.counts).map(([k, n]) => `${n} ${k}`).join(', ');
    out.push(`  wave ${w.wave}: ${w.devices} device${w.devices === 1 ? '' : 's'} (${counts})`);
  }
  const reason = r.pauseReason as { kind?: string; wave?: number; failures?: Array<{ deviceId: string; reason: string }>; by?: string } | null;
  if (r.status === 'paused' && reason?.kind === 'gate') {
    out.push(`  paused: wave ${reason.wave ?? '?'} failed its gate`);
    for (const f of reason.failures ?? []) out.push(`    ${f.deviceId}: ${f.reason}`);
  } else if (r.status === 'paused' && reason?.by) out.push(`  paused by ${reason.by}`);
  if (r.rollback) out.push(`  rollback: ${r.rollback.restored} restored, ${r.rollback.pending} pending, ${r.rollback.nothingToRestore} with nothing to restore`);
  return out.join('\n') + '\n';
}

async function create(client: ApiClient, values: Record<string, unknown>): Promise<RolloutView & { caution: string }> {
  if (typeof values.release !== 'string') throw new UsageError('missing --release');
  const devices = values.device as string[] | undefined;
  const tags = (values.tag as string[] | undefined) ?? [];
  if (devices && (values.class !== undefined || tags.length > 0)) throw new UsageError('give either --device, or --class and --tag, not both');
  const num = (flag: string, integer = false) => (values[flag] === undefined ? undefined : toNumber(flag, String(values[flag]), { positive: false, integer }));
  const gate = {
    ...(num('apply-timeout-s') !== undefined ? { applyTimeoutS: num('apply-timeout-s') } : {}),
    ...(num('telemetry-frames', true) !== undefined ? { telemetryFrames: num('telemetry-frames', true) } : {}),
    ...(num('telemetry-timeout-s') !== undefined ? { telemetryTimeoutS: num('telemetry-timeout-s') } : {}),
    ...(num('latency-tolerance') !== undefined ? { latencyTolerance: num('latency-tolerance') } : {}),
  };
  if (values.offline !== undefined && values.offline !== 'fail' && values.offline !== 'skip') {
    throw new UsageError(`--offline must be 'fail' or 'skip', got '${String(values.offline)}'`);
  }
  const offline = {
    ...(num('offline-wait-s') !== undefined ? { waitS: num('offline-wait-s') } : {}),
    ...(values.offline !== undefined ? { then: values.offline as 'fail' | 'skip' } : {}),
  };
  const request: RolloutRequestInput = {
    releaseId: values.release,
    target: devices ? { deviceIds: devices } : { ...(typeof values.class === 'string' ? { deviceClassId: values.class } : {}), tags },
    ...(typeof values.waves === 'string' ? { waves: waveSizes(values.waves) } : {}),
    gate,
    offline,
    ...(typeof values.note === 'string' ? { note: values.note } : {}),
  };
  return client.json('POST', '/api/v1/rollouts', request);
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(
      args,
      {
        ...CLIENT_FLAGS,
        release: { type: 'string' },
        device: { type: 'string', multiple: true },
        class: { type: 'string' },
        tag: { type: 'string', multiple: true },
        waves: { type: 'string' },
        'apply-timeout-s': { type: 'string' },
        'telemetry-frames': { type: 'string' },
        'telemetry-timeout-s': { type: 'string' },
        'latency-tolerance': { type: 'string' },
        'offline-wait-s': { type: 'string' },
        offline: { type: 'string' },
        note: { type: 'string' },
      },
      true,
    );
    if (values.help) return io.stdout(usage), EXIT_OK;
    const [verb, id, ...extra] = positionals;
    if (extra.length > 0) throw new UsageError(`unexpected arguments: ${extra.join(' ')}`);
    const client = createServerClient(values, io);
    try {
      if (verb === 'create') {
        if (id) throw new UsageError(`unexpected argument: ${id}`);
        const r = await create(client, values);
        if (values.json) printJson(io, r);
        else io.stdout(`${describe(r)}Caution: ${r.caution}\n`);
        return EXIT_OK;
      }
      if (verb === 'status') {
        if (!id) {
          const list = await client.json<RolloutView[]>('GET', '/api/v1/rollouts');
          if (values.json) printJson(io, list);
          else for (const r of list) io.stdout(`${r.id}  ${r.status}  release ${r.releaseId}  wave ${r.currentWave}/${r.waveCount}  ${r.createdAt}  ${r.createdBy}\n`);
          return EXIT_OK;
        }
        const r = await client.json<RolloutView>('GET', `/api/v1/rollouts/${encodeURIComponent(id)}`);
        if (values.json) printJson(io, r);
        else io.stdout(describe(r));
        return EXIT_OK;
      }
      if (verb === 'pause' || verb === 'resume' || verb === 'abort' || verb === 'rollback') {
        if (!id) throw new UsageError(`give the rollout id: ocellus rollout ${verb} ID`);
        const r = await client.json<RolloutView & { caution?: string }>('POST', `/api/v1/rollouts/${encodeURIComponent(id)}/${verb}`);
        if (values.json) printJson(io, r);
        else io.stdout(`${describe(r)}${r.caution ? `Caution: ${r.caution}\n` : ''}`);
        return EXIT_OK;
      }
      throw new UsageError(`expected 'rollout create', 'status', 'pause', 'resume', 'abort' or 'rollback', got '${verb ?? ''}'`);
    } catch (e) {
      if (e instanceof ApiError) return reportServerError(io, e);
      throw e;
    }
  });
}
