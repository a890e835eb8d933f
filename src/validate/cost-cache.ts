import { acceleratorTotals } from '../physics/accelerator.js';
import { analyzeNetwork } from '../physics/network-cost.js';
import type { DeviceClass, MemoryPartition, Network } from '../schema/index.js';

type Analysis = ReturnType<typeof analyzeNetwork>;
type Cost = ReturnType<typeof acceleratorTotals>;
type Accelerator = DeviceClass['accelerator'];

/** Network analyses, kept as long as the network object lives. */
const analyses = new WeakMap<Network, Analysis>();
/** Accelerator costs by network, then accelerator object, then memory partition. */
const costs = new WeakMap<Network, WeakMap<Accelerator, Map<string, Cost>>>();

/** analyzeNetwork, computed once per network object. Throws what analyzeNetwork throws. */
export function cachedAnalysis(network: Network): Analysis {
  let analysis = analyses.get(network);
  if (!analysis) {
    analysis = analyzeNetwork(network);
    analyses.set(network, analysis);
  }
  return analysis;
}

/** acceleratorTotals (the roofline cost without per-layer records), computed once per (network, accelerator, partition). Throws what the physics throws. */
export function cachedAcceleratorCost(network: Network, accelerator: Accelerator, partition: MemoryPartition): Cost {
  let byAccelerator = costs.get(network);
  if (!byAccelerator) {
    byAccelerator = new WeakMap();
    costs.set(network, byAccelerator);
  }
  let byPartition = byAccelerator.get(accelerator);
  if (!byPartition) {
    byPartition = new Map();
    byAccelerator.set(accelerator, byPartition);
  }
  const key = `${partition.weightBufferKib}/${partition.activationBufferKib}`;
  let cost = byPartition.get(key);
  if (!cost) {
    cost = acceleratorTotals(cachedAnalysis(network), accelerator, partition);
    byPartition.set(key, cost);
  }
  return cost;
}
