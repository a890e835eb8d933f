import type { Model } from '../schema/model.js';
import type { Network } from '../schema/network.js';
import type { BlobStore } from '../store/blobs.js';
import { shippedNetworkFrom, type ShippedNetwork } from '../validate/index.js';

/** The network a stored model's uploaded weights give, for the validator and the planner. */
export interface ShippedNetworks {
  /** Nothing for a model that takes its network from its document; otherwise the imported network or the problem. */
  forModel(model: Model, declared: Network): ShippedNetwork | Record<string, never>;
}

/** How many imported networks are kept: a server checks a handful of models over and over. */
const CACHE_ENTRIES = 16;

/**
 * Reads a model's weights from the content-addressed store by the model's sha256 (the blob the upload
 * checked), and imports them. The blob's name is its hash, so an import is kept by hash and input size
 * and never goes stale; problems (not uploaded, unsupported op) are not kept, so an upload fixes them.
 */
export function createShippedNetworks(blobs: BlobStore): ShippedNetworks {
  const cache = new Map<string, Network>();
  return {
    forModel(model, declared) {
      if (model.networkFrom !== 'weights') return {};
      const key = `${model.sha256}:${declared.input.channels}x${model.inputHeightPx}x${model.inputWidthPx}:${model.networkId}:${model.id}`;
      const hit = cache.get(key);
      if (hit) return { shippedNetwork: hit };
      const bytes = blobs.readWhole(model.sha256);
      if (bytes === null) return { shippedNetworkProblem: `the weights of model ${model.id} (sha256 ${model.sha256}) are not uploaded` };
      const result = shippedNetworkFrom(model, declared, bytes, `the uploaded weights ${model.sha256.slice(0, 12)}… of model ${model.id}`);
      if ('shippedNetwork' in result) {
        if (cache.size >= CACHE_ENTRIES) cache.delete(cache.keys().next().value!);
        cache.set(key, result.shippedNetwork);
      }
      return result;
    },
  };
}
