import { join, resolve } from 'node:path';
import { describeCatalogIssue, loadCatalog } from '../document-files/index.js';
import { ApiError } from '../api-client/api-client.js';
import { inDependencyOrder, pushDocument, uploadWeightsFile, type PushOutcome } from '../api-client/push-documents.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_BAD_INPUT, EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { CLIENT_FLAGS, createServerClient } from './server-client.js';

export const usage = `usage: ocellus push <files or folders...> [--weights DIR] [--server URL] [--token T] [--json]
  Sends documents to a running server in dependency order: device classes, networks, models, tasks,
  profiles. A new document is created; a changed one is saved as a new version (profiles: a new revision,
  validated by the server); an unchanged one is left alone. With --weights, <DIR>/<model id>.bin is
  uploaded (streamed) for each model whose weights the server does not have yet.
  --server defaults to OCELLUS_SERVER or http://127.0.0.1:8080; --token to OCELLUS_TOKEN.
  Exit 0 when everything was accepted, 2 when a file or a document was refused.
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(args, { ...CLIENT_FLAGS, weights: { type: 'string' } }, true);
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals.length === 0) throw new UsageError('give at least one file or folder to push');
    const client = createServerClient(values, io);
    const catalog = await loadCatalog(positionals, { cwd: io.cwd });
    const documents = inDependencyOrder(catalog.documents);
    const outcomes: PushOutcome[] = [];
    const notes: string[] = [];
    try {
      for (const doc of documents) {
        const o = await pushDocument(client, doc);
        outcomes.push(o);
        if (doc.kind === 'model' && values.weights && o.result !== 'refused') {
          const file = join(resolve(io.cwd, values.weights), `${doc.value.id}.bin`);
          notes.push(`${doc.value.id}: ${(await uploadWeightsFile(client, doc.value.id, file)).note}`);
        }
        if (!values.json) {
          const what = o.result === 'refused' ? `refused: ${o.error}` : `${o.result}${o.version ? ` (${o.kind === 'profile' ? 'revision' : 'version'} ${o.version})` : ''}${o.status ? `, checks ${o.status}` : ''}`;
          io.stdout(`${o.kind} ${o.id}: ${what}\n`);
          for (const i of o.issues ?? []) io.stdout(`  ${o.file}: ${i.path}: ${i.message}\n`);
        }
      }
    } catch (e) {
      if (e instanceof ApiError) {
        io.stderr(`error: ${e.message}\n`);
        return EXIT_BAD_INPUT;
      }
      throw e;
    }
    if (values.json) printJson(io, { documents: outcomes, weights: notes, issues: catalog.issues });
    else for (const n of notes) io.stdout(`model ${n}\n`);
    for (const i of catalog.issues) io.stderr(`${describeCatalogIssue(i)}\n`);
    const refused = outcomes.filter((o) => o.result === 'refused').length;
    if (!values.json) io.stdout(`${outcomes.length} documents: ${outcomes.length - refused} accepted, ${refused} refused; ${catalog.issues.length} file problems\n`);
    return refused > 0 || catalog.issues.length > 0 ? EXIT_BAD_INPUT : EXIT_OK;
  });
}
