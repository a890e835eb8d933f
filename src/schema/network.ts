import { z } from 'zod';
import { idSchema, positiveInt } from './common.js';

const layerId = z.union([z.string().min(1).max(64), z.number().int().nonnegative()]);
const base = { id: layerId.optional(), input: layerId.optional() };

export const convLayerSchema = z.strictObject({
  ...base,
  op: z.literal('conv'),
  out: positiveInt(),
  kernel: positiveInt(),
  stride: positiveInt().default(1),
  groups: positiveInt().default(1),
  bias: z.boolean().default(false),
});
export const dwconvLayerSchema = z.strictObject({
  ...base,
  op: z.literal('dwconv'),
  kernel: positiveInt(),
  stride: positiveInt().default(1),
  bias: z.boolean().default(false),
});
export const fcLayerSchema = z.strictObject({
  ...base,
  op: z.literal('fc'),
  out: positiveInt(),
  bias: z.boolean().default(true),
});
const poolFields = {
  ...base,
  kernel: positiveInt().optional(),
  stride: positiveInt().optional(),
  global: z.boolean().default(false),
};
export const maxpoolLayerSchema = z.strictObject({ ...poolFields, op: z.literal('maxpool') });
export const avgpoolLayerSchema = z.strictObject({ ...poolFields, op: z.literal('avgpool') });
export const addLayerSchema = z.strictObject({
  id: layerId.optional(),
  op: z.literal('add'),
  inputs: z.tuple([layerId, layerId]),
});
export const concatLayerSchema = z.strictObject({
  id: layerId.optional(),
  op: z.literal('concat'),
  inputs: z.array(layerId).min(2),
});

export const layerSchema = z.discriminatedUnion('op', [
  convLayerSchema,
  dwconvLayerSchema,
  fcLayerSchema,
  maxpoolLayerSchema,
  avgpoolLayerSchema,
  addLayerSchema,
  concatLayerSchema,
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
export type Network = z.infer<typeof networkSchema>;
export type NetworkInput = z.input<typeof networkSchema>;
