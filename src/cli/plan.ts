import { existsSync } from 'node:fs';
import { writeFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import { describeCatalogIssue, findDocument, loadCatalog } from '../document-files/index.js';
import type { Catalog } from '../document-files/index.js';
import { idSchema } from '../schema/index.js';
import { candidateToProfile, plan } from '../plan/index.js';
import type { Candidate, ModelCandidate, PlanOptions, PlanResult } from '../plan/index.js';
import { formatCheck } from '../validate/index.js';
import { shippedFromFile } from './shipped-network.js';
import { guard, optionalNumber, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_BAD_INPUT, EXIT_CHECK_FAILED, EXIT_OK } from './io.js';
import type { CliIo } from './io.js';

export const usage = `usage: ocellus plan --task ID --device-class ID [--models ID[,ID...]] [--catalog DIR]
                   [--granule-kib N] [--near-misses N] [--json] [--save-as ID --out FILE [--pick N]]
  Searches focus, f-number, exposure, analog gain, model and memory partition for a task on a device class,
  and prints the feasible candidates that no other candidate beats on energy per frame, predicted accuracy
  and latency together (lowest energy first). Every listed candidate passes the validator.
  --catalog DIR     where the task, device class, models and networks are (default ./profiles)
  --models IDS      models to consider, repeated or comma-separated (default every model in the catalog)
  --granule-kib N   weight-buffer step of the memory partition search (default 64)
  --near-misses N   also list the N best infeasible candidates and the checks they fail
  --save-as ID      write candidate --pick N (default 1, the lowest-energy one) as profile ID to --out FILE
  Exit 0 when some candidate is feasible, 1 when none is (the binding constraints are printed), 2 on bad
  usage or input. Planned figures are estimates: try a saved profile on one unit in a safe state before a
  staged rollout, under the site's risk assessment.
  JSON keys: front[], nearMisses[{candidate, failing[]}], evaluated, bindingConstraints[], failCounts{}, skipped[], unconfirmed, searched{}
`;

const FLAGS = {
  task: { type: 'string' },
  'device-class': { type: 'string' },
  models: { type: 'string', multiple: true },
  catalog: { type: 'string' },
  'granule-kib': { type: 'string' },
  'near-misses': { type: 'string' },
  json: { type: 'boolean' },
  'save-as': { type: 'string' },
  out: { type: 'string' },
  pick: { type: 'string' },
  help: { type: 'boolean' },
} as const;

/** Models and their networks; a model that takes its network from its weights file brings the network read from it. */
async function modelCandidates(catalog: Catalog, wanted: string[] | undefined, catalogDir: string, cwd: string): Promise<ModelCandidate[]> {
  const ids = wanted ?? catalog.documents.flatMap((d) => (d.kind === 'model' ? [d.value.id] : []));
  if (ids.length === 0) throw new UsageError(`no models found in ${catalogDir}`);
  const pairs = ids.map((id) => {
    const model = findDocument(catalog, 'model', id);
    if (!model) throw new UsageError(`--models: model '${id}' not found in ${catalogDir}`);
    const network = findDocument(catalog, 'network', model.networkId);
    if (!network) throw new UsageError(`model '${id}' names network '${model.networkId}', which is not in ${catalogDir}`);
    return { model, network };
  });
  return Promise.all(pairs.map(async (p) => ({ ...p, ...(await shippedFromFile(catalog, p.model, p.network, cwd)) })));
}

const f3 = (v: number) => (Math.abs(v) >= 100 ? v.toFixed(0) : Math.abs(v) >= 10 ? v.toFixed(1) : v.toFixed(2));

/** The front as a plain-text table, one candidate a row, numbered for --pick. */
export function formatFront(front: Candidate[]): string {
  const head = ['#', 'model', 'focus m', 'f/', 'exposure µs', 'gain', 'weights+acts KiB', 'energy mJ', 'latency ms', 'accuracy', 'blur px'];
  const rows = front.map((c, i) => [
    String(i + 1),
    c.modelId,
    String(c.camera.focusDistanceM),
    String(c.camera.fNumber),
    String(c.camera.exposureUs),
    `${c.camera.analogGain}×`,
    `${c.memory.weightBufferKib}+${c.memory.activationBufferKib}`,
    c.energyMjPerFrame.toFixed(3),
    f3(c.latencyMs),
    c.predictedAccuracy === null ? '—' : c.predictedAccuracy.toFixed(3),
    f3(c.worstBlurPx),
  ]);
  const widths = head.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k]!.length)));
  const line = (cells: string[]) => cells.map((c, k) => (k === 1 ? c.padEnd(widths[k]!) : c.padStart(widths[k]!))).join('  ').trimEnd();
  return [line(head), ...rows.map(line)].join('\n') + '\n';
}

function formatResult(result: PlanResult, taskId: string, deviceClassId: string): string {
  const out: string[] = [];
  out.push(`plan for task ${taskId} on ${deviceClassId}: ${result.evaluated} candidates evaluated, ${result.front.length} on the front`);
  for (const s of result.skipped) out.push(`  skipped ${s.modelId}: ${s.reason}`);
  if (result.unconfirmed > 0) {
    out.push(`  caution: ${result.unconfirmed} candidate${result.unconfirmed === 1 ? '' : 's'} the planner's evaluator found feasible failed the validator and ${result.unconfirmed === 1 ? 'was' : 'were'} left out; the front may be incomplete`);
  }
  if (result.front.length > 0) out.push('', formatFront(result.front).trimEnd());
  else out.push('', 'no candidate meets every check.');
  if (result.bindingConstraints.length > 0) {
    const counts = result.bindingConstraints.map((c) => (result.failCounts[c] !== undefined ? `${c} (${result.failCounts[c]})` : c));
    out.push(`${result.front.length > 0 ? 'most often failed' : 'binding constraints'}: ${counts.join(', ')}`);
  }
  result.nearMisses.forEach((n, i) => {
    const c = n.candidate;
    out.push(
      '',
      `near miss ${i + 1}: ${c.modelId}, focus ${c.camera.focusDistanceM} m, f/${c.camera.fNumber}, ${c.camera.exposureUs} µs, gain ${c.camera.analogGain}×, buffers ${c.memory.weightBufferKib}+${c.memory.activationBufferKib} KiB`,
      ...n.failing.map(formatCheck),
    );
  });
  if (result.front.length > 0) out.push('', 'Estimates only: try a planned profile on one unit in a safe state, then roll out in stages.');
  return out.join('\n') + '\n';
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, FLAGS);
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (values.task === undefined) throw new UsageError('missing --task');
    if (values['device-class'] === undefined) throw new UsageError('missing --device-class');
    const saveAs = values['save-as'];
    if (saveAs !== undefined && values.out === undefined) throw new UsageError('--save-as needs --out FILE');
    if (saveAs === undefined && (values.out !== undefined || values.pick !== undefined)) throw new UsageError('--out and --pick go with --save-as');
    if (saveAs !== undefined && !idSchema.safeParse(saveAs).success) throw new UsageError(`--save-as '${saveAs}': ${idSchema.safeParse(saveAs).error!.issues[0]!.message}`);
    if (values.out !== undefined && existsSync(resolve(io.cwd, values.out))) {
      throw new UsageError(`--out ${values.out} already exists; choose another file or remove it first`);
    }
    const pick = optionalNumber(values, 'pick', 1, { integer: true });
    const options: PlanOptions = {};
    if (values['granule-kib'] !== undefined) options.granuleKib = optionalNumber(values, 'granule-kib', 64);
    if (values['near-misses'] !== undefined) options.nearMisses = optionalNumber(values, 'near-misses', 0, { integer: true, positive: false });
    if (options.nearMisses !== undefined && options.nearMisses < 0) throw new UsageError('--near-misses must be 0 or more');

    const catalogDir = values.catalog ?? 'profiles';
    const catalog = await loadCatalog([catalogDir], { cwd: io.cwd });
    if (catalog.issues.length > 0) {
      io.stderr(`${catalog.issues.length} input problem${catalog.issues.length === 1 ? '' : 's'} in ${catalogDir}:\n${catalog.issues.map(describeCatalogIssue).join('\n')}\n`);
      return EXIT_BAD_INPUT;
    }
    const task = findDocument(catalog, 'task', values.task);
    if (!task) throw new UsageError(`--task: task '${values.task}' not found in ${catalogDir}`);
    const deviceClass = findDocument(catalog, 'device-class', values['device-class']);
    if (!deviceClass) throw new UsageError(`--device-class: device class '${values['device-class']}' not found in ${catalogDir}`);
    const wanted = values.models?.flatMap((m) => m.split(',')).map((m) => m.trim()).filter((m) => m !== '');
    const candidates = await modelCandidates(catalog, wanted, catalogDir, io.cwd);

    const result = plan({ task, deviceClass, candidates, options });
    if (values.json) printJson(io, result);
    else io.stdout(formatResult(result, task.id, deviceClass.id));
    if (result.front.length === 0) {
      if (saveAs !== undefined) io.stderr(`no feasible candidate: nothing saved to ${values.out}\n`);
      return EXIT_CHECK_FAILED;
    }

    if (saveAs !== undefined) {
      const chosen = result.front[pick - 1];
      if (!chosen) throw new UsageError(`--pick ${pick}: the front has ${result.front.length} candidate${result.front.length === 1 ? '' : 's'}`);
      const model = candidates.find((c) => c.model.id === chosen.modelId)!.model;
      const demoData = Boolean(task.demoData || deviceClass.demoData || model.demoData);
      const profile = candidateToProfile(chosen, { id: saveAs, taskId: task.id, deviceClassId: deviceClass.id, demoData });
      const file = resolve(io.cwd, values.out!);
      try {
        // 'wx': never overwrite an existing file.
        await writeFile(file, JSON.stringify(profile, null, 2) + '\n', { flag: 'wx' });
      } catch (e) {
        const code = (e as NodeJS.ErrnoException).code;
        const why = code === 'EEXIST' ? 'already exists; choose another file or remove it first' : `cannot be written (${code ?? String(e)})`;
        io.stderr(`error: --out ${values.out}: ${why}\n`);
        return EXIT_BAD_INPUT;
      }
      (values.json ? io.stderr : io.stdout)(`saved candidate ${pick} as profile ${saveAs} in ${values.out}; check it with 'ocellus check ${values.out}'\n`);
    }
    return EXIT_OK;
  });
}
