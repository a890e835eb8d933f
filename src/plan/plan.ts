/**
 * The planner: search camera settings, models and memory partitions for a task on a device class and
 * return the Pareto front of feasible candidates, each confirmed by the validator.
 */
import { analyzeNetwork } from '../physics/network-cost.js';
import { InputError, deviceClassSchema, modelSchema, networkSchema, parseWith, taskSchema } from '../schema/index.js';
import type { CheckCode, DeviceClass, InputIssue, Task } from '../schema/index.js';
import { shippedNetworkMismatch } from '../validate/index.js';
import { candidateAt, confirmCandidate } from './candidate.js';
import { FAIL_CODES, MASK_COUNT } from './codes.js';
import { candidateCount } from './evaluator.js';
import { resolveOptions, searchAxes } from './search-space.js';
import { sweep } from './sweep.js';
import { buildTables } from './tables.js';
import type { PlannedModel } from './tables.js';
import type { Candidate, ModelCandidate, NearMiss, PlanInput, PlanResult, SkippedModel } from './types.js';

/** Rounds of re-sweeping when the validator refuses a front member; each round excludes the refused ones. */
const CONFIRMATION_ROUNDS = 5;

function parseInput(input: PlanInput): { task: Task; deviceClass: DeviceClass; candidates: ModelCandidate[] } {
  const issues: InputIssue[] = [];
  const at = (prefix: string) => (i: InputIssue) => issues.push({ path: i.path === '(root)' ? prefix : `${prefix}.${i.path}`, message: i.message });
  const task = parseWith(taskSchema, input.task);
  if (!task.ok) task.issues.forEach(at('task'));
  const deviceClass = parseWith(deviceClassSchema, input.deviceClass);
  if (!deviceClass.ok) deviceClass.issues.forEach(at('deviceClass'));
  const candidates: ModelCandidate[] = [];
  if (!Array.isArray(input.candidates) || input.candidates.length === 0) {
    issues.push({ path: 'candidates', message: 'must list at least one {model, network} pair' });
  } else {
    // One parse per network object, so models that share a network share its analysis and costs.
    const networks = new Map<unknown, ReturnType<typeof parseWith<typeof networkSchema>>>();
    input.candidates.forEach((c, i) => {
      const model = parseWith(modelSchema, c?.model);
      if (!model.ok) model.issues.forEach(at(`candidates[${i}].model`));
      const network = networks.get(c?.network) ?? parseWith(networkSchema, c?.network);
      networks.set(c?.network, network);
      if (!network.ok) network.issues.forEach(at(`candidates[${i}].network`));
      let shipped: Pick<ModelCandidate, 'shippedNetwork' | 'shippedNetworkProblem'> = {};
      if (c?.shippedNetwork !== undefined) {
        const parsed = networks.get(c.shippedNetwork) ?? parseWith(networkSchema, c.shippedNetwork);
        networks.set(c.shippedNetwork, parsed);
        if (!parsed.ok) parsed.issues.forEach(at(`candidates[${i}].shippedNetwork`));
        else shipped = { shippedNetwork: parsed.value };
      } else if (typeof c?.shippedNetworkProblem === 'string') shipped = { shippedNetworkProblem: c.shippedNetworkProblem };
      if (model.ok && network.ok) candidates.push({ model: model.value, network: network.value, ...shipped });
    });
  }
  if (!task.ok || !deviceClass.ok || issues.length > 0) throw new InputError('plan input is not valid', issues, 'plan input');
  return { task: task.value, deviceClass: deviceClass.value, candidates };
}

/** Why a model is left out of the search: the validator's check it would fail, or listed twice. */
type SkipCode = Extract<CheckCode, 'model-task' | 'model-precision' | 'model-network' | 'network-cost' | 'network-weights'> | 'duplicate-model';

/** Models the search can use: measured for the task, of the accelerator's precision, costable; the rest are skipped with the validator's reason. */
function plannedModels(task: Task, deviceClass: DeviceClass, candidates: ModelCandidate[]): { models: PlannedModel[]; skipped: (SkippedModel & { code: SkipCode })[] } {
  const models: PlannedModel[] = [];
  const skipped: (SkippedModel & { code: SkipCode })[] = [];
  const precision = deviceClass.accelerator.precision;
  for (const { model, network: declared, shippedNetwork, shippedNetworkProblem } of candidates) {
    const fromWeights = model.networkFrom === 'weights';
    const network = fromWeights && shippedNetwork ? shippedNetwork : declared;
    const skip = (code: SkipCode, reason: string) => skipped.push({ modelId: model.id, code, reason });
    if (models.some((m) => m.model.id === model.id)) {
      skip('duplicate-model', `model ${model.id} is listed more than once; the first is used`);
    } else if (model.measuredForTaskIds && !model.measuredForTaskIds.includes(task.id)) {
      skip('model-task', `model ${model.id} was measured for ${model.measuredForTaskIds.join(', ')}, not for task ${task.id}`);
    } else if (model.precision !== precision) {
      skip('model-precision', `model ${model.id} is ${model.precision} but the accelerator of ${deviceClass.id} runs ${precision}`);
    } else if (model.networkId !== declared.id) {
      skip('model-network', `model ${model.id} names network '${model.networkId}' but the network given is '${declared.id ?? '(no id)'}'`);
    } else if (fromWeights && !shippedNetwork) {
      skip('network-weights', `model ${model.id} takes its network from its weights, which gave none: ${shippedNetworkProblem ?? 'the weights were not read'}`);
    } else if (fromWeights && shippedNetworkMismatch(declared, network) !== null) {
      skip('network-weights', `network ${declared.id ?? declared.name} does not match the shipped weights of model ${model.id}: ${shippedNetworkMismatch(declared, network)}`);
    } else {
      try {
        const shared = models.find((m) => m.network === network);
        models.push({ model, network, analysis: shared ? shared.analysis : analyzeNetwork(network), ...(fromWeights ? { declaredNetwork: declared } : {}) });
      } catch (e) {
        skip('network-cost', `network ${network.id ?? '(no id)'} of model ${model.id} cannot be costed: ${e instanceof Error ? e.message : String(e)}`);
      }
    }
  }
  return { models, skipped };
}

function byEnergy(a: Candidate, b: Candidate): number {
  return a.energyMjPerFrame - b.energyMjPerFrame || a.latencyMs - b.latencyMs || (b.predictedAccuracy ?? 0) - (a.predictedAccuracy ?? 0);
}

/**
 * Search the settings for a task on a device class and return the feasible Pareto front over
 * (energy per frame ↓, predicted accuracy ↑, latency ↓), sorted by energy. Every front member passes
 * `validate()`. Near misses (the best infeasible candidates with their failing checks) come back when the
 * front is empty, or when `options.nearMisses` is given. Throws InputError for bad documents or options.
 */
export function plan(input: PlanInput): PlanResult {
  const { task, deviceClass, candidates } = parseInput(input);
  const options = input.options ?? {};
  const resolved = resolveOptions(options);
  const { models, skipped } = plannedModels(task, deviceClass, candidates);
  const axes = { modelIds: models.map((m) => m.model.id), ...searchAxes(task, deviceClass, options, resolved) };
  const tables = buildTables(task, deviceClass, models, axes, options.calibration);
  const total = candidateCount(tables);
  if (total > resolved.maxCandidates) {
    throw new InputError('plan search is too large', [
      { path: 'options', message: `the grid holds ${total} candidates, more than the limit ${resolved.maxCandidates}: list fewer exposures, gains or models, or use a coarser granule` },
    ], 'plan options');
  }

  const wantNearMisses = options.nearMisses !== undefined;
  const excluded = new Set<number>();
  let result = sweep(tables, resolved.nearMisses);
  let front: Candidate[] = [];
  for (let round = 0; round < CONFIRMATION_ROUNDS; round++) {
    front = [];
    let refused = 0;
    for (const index of result.front) {
      const candidate = candidateAt(tables, index);
      const confirmation = confirmCandidate(tables, index, candidate, options.calibration);
      if (confirmation.agrees && confirmation.failing.length === 0) front.push(candidate);
      else {
        excluded.add(index);
        refused++;
      }
    }
    if (refused === 0 || round === CONFIRMATION_ROUNDS - 1) break;
    result = sweep(tables, resolved.nearMisses, excluded);
  }
  front.sort(byEnergy);

  const nearMisses: NearMiss[] = [];
  if (front.length === 0 || wantNearMisses) {
    for (const index of result.nearMisses) {
      const candidate = candidateAt(tables, index);
      const { failing } = confirmCandidate(tables, index, candidate, options.calibration);
      if (failing.length > 0) nearMisses.push({ candidate, failing });
    }
  }

  const failCounts: Record<string, number> = {};
  for (let mask = 1; mask < MASK_COUNT; mask++) {
    const n = result.maskCounts[mask]!;
    if (n === 0) continue;
    FAIL_CODES.forEach((code, bit) => {
      if (mask & (1 << bit)) failCounts[code] = (failCounts[code] ?? 0) + n;
    });
  }
  const order: string[] = [...FAIL_CODES];
  const bindingConstraints = Object.keys(failCounts).sort((a, b) => failCounts[b]! - failCounts[a]! || order.indexOf(a) - order.indexOf(b));
  // With no model left to search, what binds is why the models were skipped.
  if (models.length === 0) {
    for (const s of skipped) if (s.code !== 'duplicate-model' && !bindingConstraints.includes(s.code)) bindingConstraints.push(s.code);
  }

  return {
    front,
    nearMisses,
    evaluated: result.evaluated,
    bindingConstraints,
    failCounts,
    skipped: skipped.map(({ modelId, reason }) => ({ modelId, reason })),
    unconfirmed: excluded.size,
    searched: axes,
  };
}
