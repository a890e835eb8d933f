import { documentKinds, isDocumentKind, jsonSchemaOf } from '../schema/index.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';

export const usage = `usage: ocellus schema <kind>
  Prints the JSON Schema (draft 2020-12) of a document kind, for editors.
  kinds: ${documentKinds.join(', ')}
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(args, { help: { type: 'boolean' } }, true);
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals.length !== 1) throw new UsageError('give exactly one kind');
    const kind = positionals[0];
    if (!isDocumentKind(kind)) throw new UsageError(`unknown kind '${kind}': must be one of ${documentKinds.join(', ')}`);
    printJson(io, jsonSchemaOf(kind));
    return EXIT_OK;
  });
}
