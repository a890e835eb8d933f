import type { Check } from '../schema/index.js';
import { makeCheck } from './check.js';
import { cachedAnalysis } from './cost-cache.js';
import type { NetworkAnalysis } from '../physics/network-cost.js';
import type { ValidationInput } from './input.js';

/** Layers that carry MACs or parameters, in order: a hand-written list may leave out activations and batch norm. */
const costed = (a: NetworkAnalysis) => a.layers.filter((l) => l.macs > 0 || l.params > 0);

function firstDifference(declaredAll: NetworkAnalysis, shippedAll: NetworkAnalysis, name: string): string | null {
  const declared = costed(declaredAll);
  const shipped = costed(shippedAll);
  if (declared.length !== shipped.length) return `the weights have ${shipped.length} layers with MACs or parameters, network ${name} declares ${declared.length}`;
  for (let i = 0; i < declared.length; i++) {
    const a = declared[i]!;
    const b = shipped[i]!;
    if (a.macs !== b.macs || a.params !== b.params || a.outShape.join() !== b.outShape.join()) {
      return `costed layer ${i} differs: declared ${a.id} ${a.op} ${a.outShape.join('×')}, ${a.macs} MACs, ${a.params} parameters; weights ${b.id} ${b.op} ${b.outShape.join('×')}, ${b.macs} MACs, ${b.params} parameters`;
    }
  }
  return null;
}

/**
 * Why a declared network does not describe the shipped one (the first costed layer that differs), or null
 * when they match; either network that cannot be costed is a difference too.
 */
export function shippedNetworkMismatch(declared: ValidationInput['network'], shipped: ValidationInput['network']): string | null {
  try {
    return firstDifference(cachedAnalysis(declared), cachedAnalysis(shipped), declared.id ?? declared.name);
  } catch (e) {
    return `the declared and shipped networks cannot both be costed: ${(e as Error).message}`;
  }
}

/** The input whose network is costed: the shipped one when the model takes its network from its weights. */
export function costedInput(input: ValidationInput): ValidationInput {
  return input.model.networkFrom === 'weights' && input.shippedNetwork ? { ...input, network: input.shippedNetwork } : input;
}

/**
 * When the model takes its network from its weights file, the declared network document must describe the
 * same network: the same layers with MACs or parameters, in order, each with the same output shape, MACs and
 * parameters. Otherwise the
 * hand-written list and the file that ships disagree, and the declared costs are not the real ones.
 */
export function networkWeightsChecks(input: ValidationInput): Check[] {
  const { model } = input;
  if (model.networkFrom !== 'weights') return [];
  const file = model.weightsFile ?? '(no weightsFile)';
  if (!input.shippedNetwork) {
    return [makeCheck('network-weights', 'fail', null, null, '', 'modelId', `model ${model.id} takes its network from ${file}, which gave none: ${input.shippedNetworkProblem ?? 'the weights were not read'}`)];
  }
  let declared;
  let shipped;
  try {
    declared = cachedAnalysis(input.network);
    shipped = cachedAnalysis(input.shippedNetwork);
  } catch (e) {
    return [makeCheck('network-weights', 'fail', null, null, '', 'modelId', `model ${model.id}: the declared and shipped networks cannot both be costed: ${(e as Error).message}`)];
  }
  const problem = firstDifference(declared, shipped, input.network.id ?? input.network.name);
  return problem === null
    ? [makeCheck('network-weights', 'pass', shipped.macs, declared.macs, 'MACs', 'modelId', `network ${input.network.id ?? input.network.name} matches ${file} layer for layer (${shipped.macs} MACs, ${shipped.params} parameters); costs are from the file`)]
    : [makeCheck('network-weights', 'fail', shipped.macs, declared.macs, 'MACs', 'modelId', `network ${input.network.id ?? input.network.name} does not match the shipped weights ${file}: ${problem}; costs are from the file`)];
}
