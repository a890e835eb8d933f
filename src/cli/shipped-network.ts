import { readFile } from 'node:fs/promises';
import { dirname, resolve } from 'node:path';
import type { Catalog } from '../document-files/index.js';
import type { Model, Network } from '../schema/index.js';
import { shippedNetworkFrom, type ShippedNetwork, type ValidationInput } from '../validate/index.js';

/**
 * For a model that takes its network from its weights (`networkFrom: "weights"`), read the weights file named
 * beside the model document, check its sha256 against the model's, and import its network. A problem is
 * handed on as `shippedNetworkProblem`, which the validator reports as a failing check and the planner as a skip.
 */
export async function shippedFromFile(catalog: Catalog, model: Model, declared: Network, cwd: string): Promise<ShippedNetwork | Record<string, never>> {
  if (model.networkFrom !== 'weights') return {};
  if (!model.weightsFile) return { shippedNetworkProblem: 'the model names no weightsFile' };
  const modelFile = catalog.documents.find((d) => d.kind === 'model' && d.value.id === model.id)?.file;
  const path = resolve(modelFile ? dirname(resolve(cwd, modelFile)) : cwd, model.weightsFile);
  let bytes: Buffer;
  try {
    bytes = await readFile(path);
  } catch (e) {
    return { shippedNetworkProblem: `cannot read ${model.weightsFile}: ${(e as NodeJS.ErrnoException).code === 'ENOENT' ? 'no such file' : (e as Error).message}` };
  }
  return shippedNetworkFrom(model, declared, bytes, model.weightsFile);
}

export async function withShippedNetwork(catalog: Catalog, input: ValidationInput, cwd: string): Promise<ValidationInput> {
  return { ...input, ...(await shippedFromFile(catalog, input.model, input.network, cwd)) };
}
