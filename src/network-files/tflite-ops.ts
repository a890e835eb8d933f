/**
 * TFLite builtin operator codes and option fields this importer reads (TFLite schema.fbs: enum
 * BuiltinOperator, enum ActivationFunctionType, enum Padding, and the option tables named below).
 */
export const OP = {
  ADD: 0,
  AVERAGE_POOL_2D: 1,
  CONCATENATION: 2,
  CONV_2D: 3,
  DEPTHWISE_CONV_2D: 4,
  DEQUANTIZE: 6,
  FULLY_CONNECTED: 9,
  LOGISTIC: 14,
  MAX_POOL_2D: 17,
  MUL: 18,
  RELU: 19,
  RELU_N1_TO_1: 20,
  RELU6: 21,
  RESHAPE: 22,
  RESIZE_BILINEAR: 23,
  SOFTMAX: 25,
  TANH: 28,
  PAD: 34,
  MEAN: 40,
  SUB: 41,
  DIV: 42,
  SQUEEZE: 43,
  CAST: 53,
  PADV2: 60,
  EXPAND_DIMS: 70,
  REDUCE_MAX: 82,
  RESIZE_NEAREST_NEIGHBOR: 97,
  LEAKY_RELU: 98,
  QUANTIZE: 114,
  HARD_SWISH: 117,
  GELU: 150,
  RELU_0_TO_1: 152,
} as const;

/** Names of the operators above and of others common in converted vision models, for error messages. */
const OTHER_NAMES: Record<number, string> = {
  5: 'DEPTH_TO_SPACE',
  11: 'L2_NORMALIZATION',
  12: 'L2_POOL_2D',
  13: 'LOCAL_RESPONSE_NORMALIZATION',
  16: 'LSTM',
  26: 'SPACE_TO_DEPTH',
  36: 'GATHER',
  37: 'BATCH_TO_SPACE_ND',
  38: 'SPACE_TO_BATCH_ND',
  39: 'TRANSPOSE',
  45: 'STRIDED_SLICE',
  49: 'SPLIT',
  54: 'PRELU',
  55: 'MAXIMUM',
  57: 'MINIMUM',
  65: 'SLICE',
  67: 'TRANSPOSE_CONV',
  74: 'SUM',
  77: 'SHAPE',
  83: 'PACK',
  102: 'SPLIT_V',
  120: 'NON_MAX_SUPPRESSION_V4',
  121: 'NON_MAX_SUPPRESSION_V5',
  126: 'BATCH_MATMUL',
};
const NAMES: Record<number, string> = { ...OTHER_NAMES, ...Object.fromEntries(Object.entries(OP).map(([k, v]) => [v, k])) };

export function opName(code: number, customCode?: string): string {
  if (code < 0) return `CUSTOM ${JSON.stringify(customCode ?? '')}`;
  return NAMES[code] ?? `builtin operator ${code}`;
}

/** ActivationFunctionType: NONE 0, RELU 1, RELU_N1_TO_1 2, RELU6 3, TANH 4, SIGN_BIT 5. */
export const FUSED = { NONE: 0, RELU: 1, RELU_N1_TO_1: 2, RELU6: 3, TANH: 4, SIGN_BIT: 5 } as const;

/** Padding: SAME 0, VALID 1. */
export const PADDING = { SAME: 0, VALID: 1 } as const;

/** Field ids of the option tables (schema.fbs, in declaration order). */
export const FIELDS = {
  Conv2DOptions: { padding: 0, stride_w: 1, stride_h: 2, fused_activation_function: 3, dilation_w_factor: 4, dilation_h_factor: 5 },
  DepthwiseConv2DOptions: { padding: 0, stride_w: 1, stride_h: 2, depth_multiplier: 3, fused_activation_function: 4, dilation_w_factor: 5, dilation_h_factor: 6 },
  Pool2DOptions: { padding: 0, stride_w: 1, stride_h: 2, filter_width: 3, filter_height: 4, fused_activation_function: 5 },
  FullyConnectedOptions: { fused_activation_function: 0, weights_format: 1, keep_num_dims: 2 },
  ConcatenationOptions: { axis: 0, fused_activation_function: 1 },
  /** AddOptions, MulOptions, SubOptions, DivOptions. */
  ArithmeticOptions: { fused_activation_function: 0 },
  ReshapeOptions: { new_shape: 0 },
  ReducerOptions: { keep_dims: 0 },
  SqueezeOptions: { squeeze_dims: 0 },
} as const;

/**
 * BuiltinOptions union members (schema.fbs, union BuiltinOptions, 1-based in declaration order) of the
 * option tables above, for files written by the test exporter.
 */
export const OPTIONS_TYPE = {
  Conv2DOptions: 1,
  DepthwiseConv2DOptions: 2,
  Pool2DOptions: 5,
  FullyConnectedOptions: 8,
  SoftmaxOptions: 9,
  ConcatenationOptions: 10,
  AddOptions: 11,
  ResizeBilinearOptions: 15,
  ReshapeOptions: 17,
  MulOptions: 21,
  PadOptions: 22,
  ReducerOptions: 27,
  ResizeNearestNeighborOptions: 74,
} as const;
