import { z } from 'zod';
import { idSchema, positive, positiveInt } from './common.js';

const layerId = z.union([z.string().min(1).max(64), z.number().int().nonnegative()]);
const base = { id: layerId.optional(), input: layerId.optional() };
const nonNegativeInt = () => z.number().int().nonnegative();

/** A square size, or [height, width]. */
const sizePair = () => z.union([positiveInt(), z.tuple([positiveInt(), positiveInt()])]);

/**
 * Padding of a sliding window: "same" (out = ceil(in / stride), the default), "valid" (no padding), or
 * explicit [top, left, bottom, right] in input pixels.
 */
export const paddingSchema = z.union([
  z.enum(['same', 'valid']),
  z.tuple([nonNegativeInt(), nonNegativeInt(), nonNegativeInt(), nonNegativeInt()]),
]);

const windowFields = {
  kernel: sizePair(),
  stride: sizePair().default(1),
  padding: paddingSchema.optional(),
  dilation: sizePair().optional(),
};

export const convLayerSchema = z.strictObject({
  ...base,
  op: z.literal('conv'),
  out: positiveInt(),
  ...windowFields,
  groups: positiveInt().default(1),
  bias: z.boolean().default(false),
});
export const dwconvLayerSchema = z.strictObject({
  ...base,
  op: z.literal('dwconv'),
  ...windowFields,
  bias: z.boolean().default(false),
});
export const fcLayerSchema = z.strictObject({
  ...base,
  op: z.literal('fc'),
  out: positiveInt(),
  bias: z.boolean().default(true),
});
/** Weights [channels, out] applied to the channel vector at every position (ONNX MatMul/Gemm on features). */
export const matmulLayerSchema = z.strictObject({
  ...base,
  op: z.literal('matmul'),
  out: positiveInt(),
  bias: z.boolean().optional(),
});
const poolFields = {
  ...base,
  kernel: sizePair().optional(),
  stride: sizePair().optional(),
  padding: paddingSchema.optional(),
  /** Round the output size up instead of down (valid or explicit padding only). */
  ceil: z.boolean().optional(),
  global: z.boolean().default(false),
};
export const maxpoolLayerSchema = z.strictObject({ ...poolFields, op: z.literal('maxpool') });
export const avgpoolLayerSchema = z.strictObject({ ...poolFields, op: z.literal('avgpool') });
export const addLayerSchema = z.strictObject({
  id: layerId.optional(),
  op: z.literal('add'),
  inputs: z.tuple([layerId, layerId]),
});
/** Elementwise product; the second input may be c×1×1 (a channel scale, as in squeeze-and-excitation). */
export const mulLayerSchema = z.strictObject({
  id: layerId.optional(),
  op: z.literal('mul'),
  inputs: z.tuple([layerId, layerId]),
});
export const concatLayerSchema = z.strictObject({
  id: layerId.optional(),
  op: z.literal('concat'),
  inputs: z.array(layerId).min(2),
});
export const ACTIVATION_FUNCTIONS = [
  'relu',
  'relu6',
  'leaky-relu',
  'sigmoid',
  'hard-sigmoid',
  'hard-swish',
  'swish',
  'tanh',
  'gelu',
  'softmax',
  'clip',
  /** x·a + b with scalar constants a, b (exported graphs spell hard-swish and normalisation this way). */
  'affine',
] as const;
/** A pointwise function: no multiply-accumulates, no parameters, listed so the graph stays whole. */
export const activationLayerSchema = z.strictObject({ ...base, op: z.literal('activation'), fn: z.enum(ACTIVATION_FUNCTIONS) });
/** Nearest or bilinear resampling by a scale factor, or to a size. */
export const resizeLayerSchema = z.strictObject({
  ...base,
  op: z.literal('resize'),
  scale: z.union([positive(), z.tuple([positive(), positive()])]).optional(),
  size: z.tuple([positiveInt(), positiveInt()]).optional(),
});
export const reshapeLayerSchema = z.strictObject({ ...base, op: z.literal('reshape'), shape: z.tuple([positiveInt(), positiveInt(), positiveInt()]) });
/** c×h×w to (c·h·w)×1×1. */
export const flattenLayerSchema = z.strictObject({ ...base, op: z.literal('flatten') });
export const padLayerSchema = z.strictObject({
  ...base,
  op: z.literal('pad'),
  pads: z.tuple([nonNegativeInt(), nonNegativeInt(), nonNegativeInt(), nonNegativeInt()]),
});
/**
 * Batch normalisation: 4 parameters per channel (scale, shift, mean, variance), reported apart from
 * `params`. Folded (the default) means merged into the preceding convolution before deployment: no
 * MACs, no bytes at run time. Unfolded it costs one multiply-add per element and its scale and shift.
 */
export const batchnormLayerSchema = z.strictObject({ ...base, op: z.literal('batchnorm'), folded: z.boolean().optional() });

export const layerSchema = z.discriminatedUnion('op', [
  convLayerSchema,
  dwconvLayerSchema,
  fcLayerSchema,
  matmulLayerSchema,
  maxpoolLayerSchema,
  avgpoolLayerSchema,
  addLayerSchema,
  mulLayerSchema,
  concatLayerSchema,
  activationLayerSchema,
  resizeLayerSchema,
  reshapeLayerSchema,
  flattenLayerSchema,
  padLayerSchema,
  batchnormLayerSchema,
]);

export const networkSchema = z.strictObject({
  kind: z.literal('network').optional(),
  id: idSchema.optional(),
  name: z.string().min(1).max(200),
  demoData: z.boolean().optional(),
  notes: z.string().max(4000).optional(),
  input: z.strictObject({ channels: positiveInt(), height: positiveInt(), width: positiveInt() }),
  layers: z.array(layerSchema).min(1).max(10_000),
});

export type Layer = z.infer<typeof layerSchema>;
export type Padding = z.infer<typeof paddingSchema>;
export type Network = z.infer<typeof networkSchema>;
export type NetworkInput = z.input<typeof networkSchema>;
