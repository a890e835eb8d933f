/**
 * What TFLite's codes mean in the network document's words: fused and standalone activations, padding
 * codes, and NHWC tensor shapes as the document's c×h×w (TFLite schema.fbs enums ActivationFunctionType,
 * BuiltinOperator and Padding).
 */
import { NodeProblem, type LayerDraft } from './onnx-layers.js';
import { FUSED, OP, PADDING } from './tflite-ops.js';

export const count = (dims: readonly number[]) => dims.reduce((p, d) => p * d, 1);

/** The document's c×h×w of an NHWC tensor or of a [1, C] vector. */
export function chwOf(dims: readonly number[]): [number, number, number] {
  if (dims.length === 4) return [dims[3]!, dims[1]!, dims[2]!];
  if (dims.length === 2) return [dims[1]!, 1, 1];
  throw new NodeProblem(`tensors of rank ${dims.length} are not supported (only [1, H, W, C] and [1, C])`);
}

export const FUSED_LAYERS: Record<number, (LayerDraft & { op: 'activation' }) | undefined> = {
  [FUSED.NONE]: undefined,
  [FUSED.RELU]: { op: 'activation', fn: 'relu' },
  [FUSED.RELU_N1_TO_1]: { op: 'activation', fn: 'clip' },
  [FUSED.RELU6]: { op: 'activation', fn: 'relu6' },
  [FUSED.TANH]: { op: 'activation', fn: 'tanh' },
};

export const ACTIVATION_OPS: Record<number, LayerDraft & { op: 'activation' }> = {
  [OP.RELU]: { op: 'activation', fn: 'relu' },
  [OP.RELU6]: { op: 'activation', fn: 'relu6' },
  [OP.RELU_N1_TO_1]: { op: 'activation', fn: 'clip' },
  [OP.RELU_0_TO_1]: { op: 'activation', fn: 'clip' },
  [OP.LOGISTIC]: { op: 'activation', fn: 'sigmoid' },
  [OP.TANH]: { op: 'activation', fn: 'tanh' },
  [OP.HARD_SWISH]: { op: 'activation', fn: 'hard-swish' },
  [OP.LEAKY_RELU]: { op: 'activation', fn: 'leaky-relu' },
  [OP.GELU]: { op: 'activation', fn: 'gelu' },
  [OP.SOFTMAX]: { op: 'activation', fn: 'softmax' },
};

export const sizeField = (p: [number, number]): number | [number, number] => (p[0] === p[1] ? p[0] : p);

export function paddingOf(code: number): 'same' | 'valid' {
  if (code === PADDING.SAME) return 'same';
  if (code === PADDING.VALID) return 'valid';
  throw new NodeProblem(`padding ${code} is not a TFLite value (SAME 0, VALID 1)`);
}
