import type { NetworkAnalysis } from '../physics/network-cost.js';
import { BYTES_PER_ELEMENT, type Precision } from '../schema/index.js';

/** The JSON figures `cost` and `import-network` share, so a written document costs the same under both. */
export function costFigures(analysis: NetworkAnalysis, precision: Precision) {
  return {
    macs: analysis.macs,
    params: analysis.params,
    batch_norm_params: analysis.batchNormParams,
    peak_activation_bytes: analysis.peakActivationElements * BYTES_PER_ELEMENT[precision],
    layers: analysis.layers.map((l) => ({
      id: l.id,
      op: l.op,
      out_shape: l.outShape,
      macs: l.macs,
      params: l.params,
      // What the roofline moves per layer: weights, inputs and output, in bytes at this precision.
      weight_bytes: l.params * BYTES_PER_ELEMENT[precision],
      input_bytes: l.inputElements * BYTES_PER_ELEMENT[precision],
      output_bytes: l.outputElements * BYTES_PER_ELEMENT[precision],
    })),
  };
}
