import { resolve } from 'node:path';
import { generateSigningKeyPair } from '../protocol/signing.js';
import { rotateSigningKey } from '../store/index.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';

export const usage = `usage: ocellus key rotate [--data ./ocellus-data] [--json]
  Replaces the server's release signing key. The new key is introduced by a statement the old key
  signs; every release signed afterwards carries the chain, so agents that trust the first key follow
  it and from then on trust only the new key. Restart the server for it to sign with the new key.
  Releases signed before are refused by agents that have moved on; re-issue one to send it again.
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(args, { data: { type: 'string' }, json: { type: 'boolean' }, help: { type: 'boolean' } }, true);
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals[0] !== 'rotate' || positionals.length > 1) throw new UsageError(`expected 'key rotate', got 'key ${positionals.join(' ')}'`);
    const dataDir = resolve(io.cwd, values.data ?? 'ocellus-data');
    let r: ReturnType<typeof rotateSigningKey>;
    try {
      r = rotateSigningKey(dataDir, generateSigningKeyPair, new Date().toISOString());
    } catch (e) {
      throw new UsageError(`cannot rotate the signing key in ${dataDir}: ${(e as Error).message}`);
    }
    if (values.json) printJson(io, { previousKeyId: r.previousKeyId, keyId: r.keyId, chainLength: r.chainLength });
    else io.stdout(`signing key rotated: ${r.previousKeyId} -> ${r.keyId} (chain of ${r.chainLength}); restart the server to sign with it\n`);
    return EXIT_OK;
  });
}
