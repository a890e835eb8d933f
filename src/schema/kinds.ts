import { z } from 'zod';
import { deviceClassSchema } from './device-class.js';
import { modelSchema } from './model.js';
import { networkSchema } from './network.js';
import { profileSchema } from './profile.js';
import { taskSchema } from './task.js';

/** Every kind of document Ocellus keeps, by the name used in files (`kind`), the CLI and the API. */
export const documentSchemas = {
  'device-class': deviceClassSchema,
  network: networkSchema,
  model: modelSchema,
  task: taskSchema,
  profile: profileSchema,
} as const;

export type DocumentKind = keyof typeof documentSchemas;
export const documentKinds = Object.keys(documentSchemas) as DocumentKind[];

export function isDocumentKind(s: unknown): s is DocumentKind {
  return typeof s === 'string' && s in documentSchemas;
}

/** JSON Schema (draft 2020-12) of a kind, for editors; the input form, so defaults are optional. */
export function jsonSchemaOf(kind: DocumentKind): unknown {
  return z.toJSONSchema(documentSchemas[kind], { io: 'input', unrepresentable: 'any' });
}
