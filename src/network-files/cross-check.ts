import { analyzeNetwork } from '../physics/network-cost.js';
import { InputError } from '../schema/issues.js';
import { networkSchema, type NetworkInput } from '../schema/network.js';

/**
 * The cost walk must reach the same c×h×w as the importer for every layer; a disagreement is a bug to
 * report, never a document to write. `expected` holds the importer's c×h×w by layer id.
 */
export function crossCheckShapes(network: NetworkInput, expected: Map<string, readonly number[]>, source: string, fileKind: string): void {
  const parsed = networkSchema.safeParse(network);
  if (!parsed.success) throw new InputError(`${source}: the imported layers do not form a valid network document`, parsed.error.issues.map((i) => ({ path: i.path.join('.'), message: i.message })), source);
  const analysis = analyzeNetwork(parsed.data);
  analysis.layers.forEach((l, i) => {
    const want = expected.get(l.id);
    if (!want) return;
    if (want.some((d, k) => d !== l.outShape[k])) {
      throw new InputError(`${source}: layer ${l.id}: the cost walk gives ${l.outShape.join('×')}, the ${fileKind} graph ${want.join('×')}`, [{ path: `layers[${i}]`, message: 'shape disagreement between importer and cost walk' }], source);
    }
  });
}
