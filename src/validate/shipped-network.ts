import { createHash } from 'node:crypto';
import { importNetworkFile } from '../network-files/index.js';
import { InputError, networkSchema, type Model, type Network } from '../schema/index.js';

/** The network a model's weights give, or why they give none; handed to the validator as `shippedNetwork`/`shippedNetworkProblem`. */
export type ShippedNetwork = { shippedNetwork: Network } | { shippedNetworkProblem: string };

/**
 * For a model that takes its network from its weights (`networkFrom: "weights"`): check the bytes' sha256
 * against the model's and import the network they hold (ONNX or TFLite, told apart by content), at the
 * model's input size and the declared network's channel count. `bytes` is null when the weights are not
 * to be had; `source` names them in messages (a file path, or the stored blob's hash). Nothing here
 * throws for a bad file: the problem becomes the validator's failing `network-weights` check.
 */
export function shippedNetworkFrom(model: Model, declared: Network, bytes: Uint8Array | null, source: string): ShippedNetwork {
  if (bytes === null) return { shippedNetworkProblem: `the weights ${source} are not available` };
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  if (sha256 !== model.sha256) return { shippedNetworkProblem: `${source} has sha256 ${sha256}, the model declares ${model.sha256}` };
  try {
    const imported = importNetworkFile(bytes, source, {
      inputShape: [1, declared.input.channels, model.inputHeightPx, model.inputWidthPx],
      id: model.networkId,
      name: `${model.id} weights`,
    });
    return { shippedNetwork: networkSchema.parse(imported.network) };
  } catch (e) {
    if (e instanceof InputError) return { shippedNetworkProblem: e.message };
    throw e;
  }
}
