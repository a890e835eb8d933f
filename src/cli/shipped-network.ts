import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import { dirname, resolve } from 'node:path';
import type { Catalog } from '../document-files/index.js';
import { importNetworkFile } from '../network-files/index.js';
import { InputError, networkSchema } from '../schema/index.js';
import type { ValidationInput } from '../validate/index.js';

/**
 * For a model that takes its network from its weights (`networkFrom: "weights"`), read the weights file named
 * beside the model document, check its sha256 against the model's, and import its network. A problem is
 * handed to the validator, which reports it as a failing check.
 */
export async function withShippedNetwork(catalog: Catalog, input: ValidationInput, cwd: string): Promise<ValidationInput> {
  const { model } = input;
  if (model.networkFrom !== 'weights') return input;
  if (!model.weightsFile) return { ...input, shippedNetworkProblem: 'the model names no weightsFile' };
  const modelFile = catalog.documents.find((d) => d.kind === 'model' && d.value.id === model.id)?.file;
  const path = resolve(modelFile ? dirname(resolve(cwd, modelFile)) : cwd, model.weightsFile);
  let bytes: Buffer;
  try {
    bytes = await readFile(path);
  } catch (e) {
    return { ...input, shippedNetworkProblem: `cannot read ${model.weightsFile}: ${(e as NodeJS.ErrnoException).code === 'ENOENT' ? 'no such file' : (e as Error).message}` };
  }
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  if (sha256 !== model.sha256) return { ...input, shippedNetworkProblem: `${model.weightsFile} has sha256 ${sha256}, the model declares ${model.sha256}` };
  try {
    const imported = importNetworkFile(bytes, model.weightsFile, {
      inputShape: [1, input.network.input.channels, model.inputHeightPx, model.inputWidthPx],
      id: model.networkId,
      name: `${model.id} weights`,
    });
    return { ...input, shippedNetwork: networkSchema.parse(imported.network) };
  } catch (e) {
    if (e instanceof InputError) return { ...input, shippedNetworkProblem: e.message };
    throw e;
  }
}
