import type { Profile } from '../schema/index.js';
import type { Catalog, CatalogDocument, CatalogIssue, ResolveResult } from './types.js';

type ValueOf<K extends CatalogDocument['kind']> = Extract<CatalogDocument, { kind: K }>['value'];

/** The document of a kind with an id, or undefined. */
export function findDocument<K extends CatalogDocument['kind']>(catalog: Catalog, kind: K, id: string): ValueOf<K> | undefined {
  const doc = catalog.documents.find((d) => d.kind === kind && d.value.id === id);
  return doc?.value as ValueOf<K> | undefined;
}

/** Every profile in the catalog with the file it came from. */
export function profilesOf(catalog: Catalog): { file: string; profile: Profile }[] {
  return catalog.documents.flatMap((d) => (d.kind === 'profile' ? [{ file: d.file, profile: d.value }] : []));
}

/**
 * Find a profile's task, device class and model, and the model's network, by id. A missing reference
 * comes back as an issue located at the profile's file and field.
 */
export function resolveProfile(catalog: Catalog, profile: Profile, file?: string): ResolveResult {
  const where = file ?? catalog.documents.find((d) => d.kind === 'profile' && d.value === profile)?.file ?? `profile ${profile.id}`;
  const issues: CatalogIssue[] = [];
  const missing = (path: string, what: string, id: string, extra = '') =>
    issues.push({ file: where, path, message: `profile ${profile.id}: ${what} '${id}' not found in the catalog${extra}` });

  const task = findDocument(catalog, 'task', profile.taskId);
  if (!task) missing('taskId', 'taskId', profile.taskId);
  const deviceClass = findDocument(catalog, 'device-class', profile.deviceClassId);
  if (!deviceClass) missing('deviceClassId', 'deviceClassId', profile.deviceClassId);
  const model = findDocument(catalog, 'model', profile.modelId);
  if (!model) missing('modelId', 'modelId', profile.modelId);
  const network = model ? findDocument(catalog, 'network', model.networkId) : undefined;
  if (model && !network) missing('modelId', 'network', model.networkId, ` (named by model ${model.id})`);

  if (!task || !deviceClass || !model || !network) return { ok: false, issues };
  return { ok: true, value: { file: where, profile, task, deviceClass, model, network } };
}
