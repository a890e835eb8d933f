/**
 * Latency and energy of one inference on the accelerator: a per-layer roofline with a two-part
 * on-chip memory (Williams, Waterman, Patterson, "Roofline", CACM 2009).
 *
 * The model, per layer (bytes = elements × bytes per element of the accelerator's precision):
 *  - W = parameters, I = all input activations, O = output activations.
 *  - Weights are resident when the whole network's weights fit the weight buffer: no DRAM traffic for
 *    weights per frame (loading them is task-switch time, at flash read bandwidth). Otherwise every
 *    layer streams its weights from DRAM every frame.
 *  - Activations stay on chip when I + O fit the activation buffer; otherwise the layer reads I and
 *    writes O through DRAM. Each layer is judged on its own (a simplification: a spilled output read by a
 *    layer that fits is not charged again). The first layer always reads its input (the frame) from DRAM.
 *  - Compute time = MACs / (MAC units × clock); memory time = DRAM bytes / DRAM bandwidth;
 *    layer latency = max of the two (roofline). Ties, including layers with no work, count as compute-bound.
 *  - Energy = MACs × energy per MAC + (W + I + O) × energy per SRAM byte + DRAM bytes × energy per DRAM byte,
 *    plus static power × latency. Layers run one after another; the total is the sum over layers.
 */
import { BYTES_PER_ELEMENT } from '../schema/common.js';
import type { DeviceClass } from '../schema/device-class.js';
import type { MemoryPartition } from '../schema/profile.js';
import type { LayerAnalysis, NetworkAnalysis } from './network-cost.js';
import { MS_PER_S, gbPerSToBytesPerS, kibToBytes, mbPerSToBytesPerS, mhzToHz, mwMsToMj, pjToMj, sToMs } from './units.js';

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
}

export interface AcceleratorTotals {
  latencyMs: number;
  energyMj: number;
  dramBytes: number;
  /** Bytes of all weights at the accelerator's precision. */
  weightBytes: number;
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

/** Walk the layers once; when `sink` is given, also record each layer's cost. Allocation-free otherwise. */
function walk(analysis: NetworkAnalysis, accelerator: Accelerator, partition: MemoryPartition, sink?: AcceleratorLayerCost[]): AcceleratorTotals {
  const bytesPerElement = BYTES_PER_ELEMENT[accelerator.precision];
  const weightBytes = analysis.params * bytesPerElement;
  const weightsResident = weightBytes <= kibToBytes(partition.weightBufferKib);
  const activationBufferBytes = kibToBytes(partition.activationBufferKib);
  const macsPerMs = peakMacsPerS(accelerator) / MS_PER_S;
  const dramBytesPerMs = gbPerSToBytesPerS(accelerator.dramBandwidthGbPerS) / MS_PER_S;
  const { energyPjPerMac, energyPjPerSramByte, energyPjPerDramByte, staticPowerMw } = accelerator;

  let latencyMs = 0;
  let energyMj = 0;
  let dramBytes = 0;
  let computeBoundLayers = 0;
  const layers: LayerAnalysis[] = analysis.layers;
  for (let i = 0; i < layers.length; i++) {
    const layer = layers[i]!;
    const w = layer.params * bytesPerElement;
    const inBytes = layer.inputElements * bytesPerElement;
    const outBytes = layer.outputElements * bytesPerElement;
    const spills = inBytes + outBytes > activationBufferBytes;
    let layerDram = weightsResident ? 0 : w;
    if (spills) layerDram += inBytes + outBytes;
    else if (i === 0) layerDram += inBytes;
    const computeMs = layer.macs / macsPerMs;
    const memoryMs = layerDram / dramBytesPerMs;
    const memoryBound = memoryMs > computeMs;
    const layerMs = memoryBound ? memoryMs : computeMs;
    const dynamicPj = layer.macs * energyPjPerMac + (w + inBytes + outBytes) * energyPjPerSramByte + layerDram * energyPjPerDramByte;
    const layerMj = pjToMj(dynamicPj) + mwMsToMj(staticPowerMw, layerMs);
    latencyMs += layerMs;
    energyMj += layerMj;
    dramBytes += layerDram;
    if (!memoryBound) computeBoundLayers++;
    if (sink) {
      sink.push({ id: layer.id, op: layer.op, computeMs, memoryMs, latencyMs: layerMs, energyMj: layerMj, dramBytes: layerDram, bound: memoryBound ? 'memory' : 'compute' });
    }
  }
  return { latencyMs, energyMj, dramBytes, weightBytes, weightsResident, weightLoadMs: weightLoadMs(weightBytes, accelerator), computeBoundLayers };
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
