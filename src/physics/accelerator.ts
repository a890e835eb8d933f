/**
 * Latency and energy of one inference on the accelerator: a per-layer roofline with a two-part
 * on-chip memory (Williams, Waterman, Patterson, "Roofline", CACM 2009).
 *
 * The model, per layer (bytes = elements × bytes per element of the accelerator's precision):
 *  - W = parameters, I = all input activations, O = output activations.
 *  - Weight residency is partial: layers are made resident in the weight buffer greedily, in order of DRAM
 *    bytes saved per frame per KiB of buffer they take (each weight byte is read once per frame, so the ratio
 *    is the same for every layer and the order falls back to the largest layer first, then the earlier one),
 *    each layer that still fits being taken (first fit). A resident layer reads no weights from DRAM; every
 *    other layer streams its weights every frame. Loading the resident weights is task-switch time, at flash
 *    read bandwidth.
 *  - A layer fits the activation buffer when I + O do. A tensor is spilled when its producer or any of its
 *    consumers does not fit; a spilled tensor costs its bytes once when written and once for every layer that
 *    reads it. The network's input (the frame) is always read from DRAM by the layers that take it.
 *  - Compute time = MACs / (MAC units × clock × utilisation of the op kind); memory time = DRAM bytes /
 *    DRAM bandwidth; layer latency = max of the two (roofline; ties, including layers with no work, count as
 *    compute-bound) plus the per-layer dispatch overhead.
 *  - Energy = MACs × energy per MAC + W × SRAM energy per byte at the weight buffer's size + (I + O) × SRAM
 *    energy per byte at the activation buffer's size + DRAM bytes × energy per DRAM byte, plus static power ×
 *    latency. SRAM energy by size is interpolated in log₂ of the size between the given points (SRAM access
 *    energy grows with array size: Horowitz, ISSCC 2014, 8 KB 10 pJ, 32 KB 20 pJ, 1 MB 100 pJ per 64 bits).
 *    Layers run one after another; the total is the sum over layers.
 */
import { BYTES_PER_ELEMENT } from '../schema/common.js';
import type { DeviceClass } from '../schema/device-class.js';
import type { MemoryPartition } from '../schema/profile.js';
import type { LayerAnalysis, NetworkAnalysis } from './network-cost.js';
import { MS_PER_S, gbPerSToBytesPerS, kibToBytes, mbPerSToBytesPerS, mhzToHz, mwMsToMj, pjToMj, sToMs, usToMs } from './units.js';

export type Accelerator = DeviceClass['accelerator'];
export type RooflineBound = 'compute' | 'memory';

export interface AcceleratorLayerCost {
  id: string;
  op: string;
  computeMs: number;
  memoryMs: number;
  latencyMs: number;
  /** Dynamic energy plus the static power over this layer's latency. */
  energyMj: number;
  dramBytes: number;
  bound: RooflineBound;
  weightsResident: boolean;
  outputSpilled: boolean;
}

export interface AcceleratorTotals {
  latencyMs: number;
  energyMj: number;
  dramBytes: number;
  /** Bytes of all weights at the accelerator's precision. */
  weightBytes: number;
  /** Bytes of the weights kept in the weight buffer. */
  residentWeightBytes: number;
  /** All weights resident. */
  weightsResident: boolean;
  /** Time to load all weights at flash read bandwidth (task-switch cost). */
  weightLoadMs: number;
  computeBoundLayers: number;
}

export interface AcceleratorCost extends AcceleratorTotals {
  layers: AcceleratorLayerCost[];
}

/** Peak multiply-accumulates per second: MAC units × clock. */
export function peakMacsPerS(accelerator: Accelerator): number {
  return accelerator.macUnits * mhzToHz(accelerator.clockMhz);
}

/** Roofline ridge point in MACs per DRAM byte: peak compute ÷ bandwidth (Williams et al. 2009). */
export function ridgePointMacsPerByte(accelerator: Accelerator): number {
  return peakMacsPerS(accelerator) / gbPerSToBytesPerS(accelerator.dramBandwidthGbPerS);
}

/** Time to read all weights from flash, in ms. */
export function weightLoadMs(weightBytes: number, accelerator: Accelerator): number {
  return sToMs(weightBytes / mbPerSToBytesPerS(accelerator.flashReadMbPerS));
}

type Utilisation = DeviceClass['accelerator']['utilisation'];

/** Share of the peak MAC rate an op kind reaches (1 for ops without MACs). */
export function utilisationOf(utilisation: Utilisation | undefined, op: string): number {
  if (!utilisation) return 1;
  if (op === 'conv') return utilisation.conv ?? 1;
  if (op === 'dwconv') return utilisation.dwconv ?? 1;
  if (op === 'fc') return utilisation.fc ?? 1;
  return 1;
}

/** SRAM energy per byte for a buffer size: log₂-linear between the points, ends held; the flat value without points. */
export function sramEnergyPjPerByte(flatPj: number, points: Accelerator['sramEnergyBySize'], bufferKib: number): number {
  if (!points || points.length === 0) return flatPj;
  const first = points[0]!;
  const last = points[points.length - 1]!;
  if (!(bufferKib > first.bufferKib)) return first.energyPjPerByte;
  if (bufferKib >= last.bufferKib) return last.energyPjPerByte;
  let i = 1;
  while (points[i]!.bufferKib < bufferKib) i++;
  const a = points[i - 1]!;
  const b = points[i]!;
  const t = Math.log2(bufferKib / a.bufferKib) / Math.log2(b.bufferKib / a.bufferKib);
  return a.energyPjPerByte + t * (b.energyPjPerByte - a.energyPjPerByte);
}

/**
 * Which layers keep their weights in a buffer of `capacityBytes` (see the module comment): greedy by DRAM
 * bytes saved per KiB taken, largest first on ties, first fit. Returns one flag per layer.
 */
export function residentLayers(weightBytesPerLayer: readonly number[], capacityBytes: number): Uint8Array {
  const n = weightBytesPerLayer.length;
  const resident = new Uint8Array(n);
  let total = 0;
  for (let i = 0; i < n; i++) total += weightBytesPerLayer[i]!;
  if (total <= capacityBytes) return resident.fill(1);
  const order: number[] = [];
  for (let i = 0; i < n; i++) if (weightBytesPerLayer[i]! > 0) order.push(i);
  // Bytes saved per frame per KiB are equal for every layer (one read per frame), so the ratio ties and size decides.
  order.sort((a, b) => weightBytesPerLayer[b]! - weightBytesPerLayer[a]! || a - b);
  let used = 0;
  for (const i of order) {
    const w = weightBytesPerLayer[i]!;
    if (used + w <= capacityBytes) {
      resident[i] = 1;
      used += w;
    }
  }
  return resident;
}

/** Walk the layers once; when `sink` is given, also record each layer's cost. */
function walk(analysis: NetworkAnalysis, accelerator: Accelerator, partition: MemoryPartition, sink?: AcceleratorLayerCost[]): AcceleratorTotals {
  const bytesPerElement = BYTES_PER_ELEMENT[accelerator.precision];
  const layers: LayerAnalysis[] = analysis.layers;
  const n = layers.length;
  const weightBytes = analysis.params * bytesPerElement;
  const perLayerWeights: number[] = new Array(n);
  for (let i = 0; i < n; i++) perLayerWeights[i] = layers[i]!.params * bytesPerElement;
  const resident = residentLayers(perLayerWeights, kibToBytes(partition.weightBufferKib));
  const activationBufferBytes = kibToBytes(partition.activationBufferKib);
  // A layer fits when its inputs and output fit the activation buffer; a tensor spills when its producer or a consumer does not.
  const fits = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    const l = layers[i]!;
    fits[i] = (l.inputElements + l.outputElements) * bytesPerElement <= activationBufferBytes ? 1 : 0;
  }
  const spilled = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    if (!fits[i]) spilled[i] = 1;
    for (const j of layers[i]!.inputLayers) if (j >= 0 && !fits[i]) spilled[j] = 1;
  }
  const macsPerMs = peakMacsPerS(accelerator) / MS_PER_S;
  const dramBytesPerMs = gbPerSToBytesPerS(accelerator.dramBandwidthGbPerS) / MS_PER_S;
  const overheadMs = usToMs(accelerator.layerOverheadUs ?? 0);
  const { energyPjPerMac, energyPjPerDramByte, staticPowerMw } = accelerator;
  const weightSramPj = sramEnergyPjPerByte(accelerator.energyPjPerSramByte, accelerator.sramEnergyBySize, partition.weightBufferKib);
  const activationSramPj = sramEnergyPjPerByte(accelerator.energyPjPerSramByte, accelerator.sramEnergyBySize, partition.activationBufferKib);
  let latencyMs = 0;
  let energyMj = 0;
  let dramBytes = 0;
  let residentWeightBytes = 0;
  let computeBoundLayers = 0;
  for (let i = 0; i < n; i++) {
    const layer = layers[i]!;
    const w = perLayerWeights[i]!;
    const inBytes = layer.inputElements * bytesPerElement;
    const outBytes = layer.outputElements * bytesPerElement;
    let layerDram = 0;
    if (resident[i]) residentWeightBytes += w;
    else layerDram += w;
    const inputs = layer.inputLayers;
    if (inputs.length === 1) {
      // The common case: the whole input comes from one tensor.
      const j = inputs[0]!;
      if (j < 0 || spilled[j]) layerDram += inBytes;
    } else {
      for (const j of inputs) {
        if (j < 0 || spilled[j]) layerDram += elementsOf(analysis, j) * bytesPerElement;
      }
    }
    if (spilled[i]) layerDram += outBytes;
    const computeMs = layer.macs / (macsPerMs * utilisationOf(accelerator.utilisation, layer.op));
    const memoryMs = layerDram / dramBytesPerMs;
    const memoryBound = memoryMs > computeMs;
    const layerMs = (memoryBound ? memoryMs : computeMs) + overheadMs;
    const dynamicPj = layer.macs * energyPjPerMac + w * weightSramPj + (inBytes + outBytes) * activationSramPj + layerDram * energyPjPerDramByte;
    const layerMj = pjToMj(dynamicPj) + mwMsToMj(staticPowerMw, layerMs);
    latencyMs += layerMs;
    energyMj += layerMj;
    dramBytes += layerDram;
    if (!memoryBound) computeBoundLayers++;
    if (sink) {
      sink.push({ id: layer.id, op: layer.op, computeMs, memoryMs, latencyMs: layerMs, energyMj: layerMj, dramBytes: layerDram, bound: memoryBound ? 'memory' : 'compute', weightsResident: resident[i] === 1, outputSpilled: spilled[i] === 1 });
    }
  }
  return {
    latencyMs, energyMj, dramBytes, weightBytes, residentWeightBytes,
    weightsResident: residentWeightBytes === weightBytes,
    weightLoadMs: weightLoadMs(weightBytes, accelerator),
    computeBoundLayers,
  };
}

/** Elements of the tensor a layer reads from producer j (−1: the network's input). */
function elementsOf(analysis: NetworkAnalysis, j: number): number {
  if (j < 0) return analysis.inputElements;
  return analysis.layers[j]!.outputElements;
}

/** Totals only: the fast path for the validator's sweeps (no per-layer records). */
export function acceleratorTotals(analysis: NetworkAnalysis, accelerator: Accelerator, partition: MemoryPartition): AcceleratorTotals {
  return walk(analysis, accelerator, partition);
}

/** Totals and per-layer costs (see the module comment for the model). */
export function acceleratorCost(analysis: NetworkAnalysis, accelerator: Accelerator, partition: MemoryPartition): AcceleratorCost {
  const layers: AcceleratorLayerCost[] = [];
  const totals = walk(analysis, accelerator, partition, layers);
  return { ...totals, layers };
}
