import { createReadStream, existsSync, statSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { Readable } from 'node:stream';
import { loadCatalog, type CatalogDocument } from '../catalog/index.js';
import { canonicalJson } from '../protocol/canonical-json.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_BAD_INPUT, EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { CLIENT_FLAGS, createServerClient, ServerError, type ServerClient } from './server-client.js';

export const usage = `usage: ocellus push <files or folders...> [--weights DIR] [--server URL] [--token T] [--json]
  Sends documents to a running server in dependency order: device classes, networks, models, tasks,
  profiles. A new document is created; a changed one is saved as a new version (profiles: a new revision,
  validated by the server); an unchanged one is left alone. With --weights, <DIR>/<model id>.bin is
  uploaded (streamed) for each model whose weights the server does not have yet.
  --server defaults to OCELLUS_SERVER or http://127.0.0.1:8080; --token to OCELLUS_TOKEN.
  Exit 0 when everything was accepted, 2 when a file or a document was refused.
`;

const ORDER: CatalogDocument['kind'][] = ['device-class', 'network', 'model', 'task', 'profile'];
const COLLECTION: Record<CatalogDocument['kind'], string> = {
  'device-class': 'device-classes',
  network: 'networks',
  model: 'models',
  task: 'tasks',
  profile: 'profiles',
};

interface Outcome {
  file: string;
  kind: string;
  id: string;
  result: 'created' | 'updated' | 'unchanged' | 'refused';
  version?: number;
  status?: string;
  issues?: Array<{ path: string; message: string }>;
  error?: string;
}

async function existing(client: ServerClient, path: string): Promise<Record<string, unknown> | null> {
  try {
    return await client.json<Record<string, unknown>>('GET', path);
  } catch (e) {
    if (e instanceof ServerError && e.status === 404) return null;
    throw e;
  }
}

async function pushOne(client: ServerClient, doc: CatalogDocument): Promise<Outcome> {
  const base = `/api/v1/${COLLECTION[doc.kind]}`;
  const id = doc.value.id;
  const outcome = { file: doc.file, kind: doc.kind, id };
  try {
    const current = await existing(client, `${base}/${encodeURIComponent(id)}`);
    const stored = current ? (doc.kind === 'profile' ? current.profile : current.document) : undefined;
    if (current && canonicalJson(stored) === canonicalJson(doc.value)) {
      return { ...outcome, result: 'unchanged', version: Number(current.revision ?? current.version) };
    }
    const saved = current
      ? await client.json<Record<string, unknown>>('PUT', `${base}/${encodeURIComponent(id)}`, doc.value)
      : await client.json<Record<string, unknown>>('POST', base, doc.value);
    return {
      ...outcome,
      result: current ? 'updated' : 'created',
      version: Number(saved.revision ?? saved.version),
      ...(typeof saved.status === 'string' ? { status: saved.status } : {}),
    };
  } catch (e) {
    if (!(e instanceof ServerError) || e.status === 0) throw e;
    return { ...outcome, result: 'refused', error: e.message, issues: e.issues };
  }
}

async function uploadWeights(client: ServerClient, weightsDir: string, modelId: string): Promise<string> {
  const model = await client.json<{ weights?: { uploaded: boolean } }>('GET', `/api/v1/models/${encodeURIComponent(modelId)}`);
  if (model.weights?.uploaded) return 'weights already on the server';
  const file = join(weightsDir, `${modelId}.bin`);
  if (!existsSync(file)) return `no weights file ${file}`;
  const res = await client.raw('PUT', `/api/v1/models/${encodeURIComponent(modelId)}/weights`, {
    body: Readable.toWeb(createReadStream(file)) as unknown as ReadableStream<Uint8Array>,
    headers: { 'content-type': 'application/octet-stream', 'content-length': String(statSync(file).size) },
  });
  const body = (await res.json().catch(() => null)) as { error?: string; issues?: Array<{ message: string }> } | null;
  if (!res.ok) throw new ServerError(res.status, `weights of ${modelId}: ${res.status} ${body?.error ?? ''} ${body?.issues?.[0]?.message ?? ''}`.trim(), [], body);
  return `weights uploaded from ${file}`;
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(args, { ...CLIENT_FLAGS, weights: { type: 'string' } }, true);
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals.length === 0) throw new UsageError('give at least one file or folder to push');
    const client = createServerClient(values, io);
    const catalog = await loadCatalog(positionals, { cwd: io.cwd });
    const documents = [...catalog.documents].sort((a, b) => ORDER.indexOf(a.kind) - ORDER.indexOf(b.kind));
    const outcomes: Outcome[] = [];
    const notes: string[] = [];
    try {
      for (const doc of documents) {
        const o = await pushOne(client, doc);
        outcomes.push(o);
        if (doc.kind === 'model' && values.weights && o.result !== 'refused') {
          notes.push(`${doc.value.id}: ${await uploadWeights(client, resolve(io.cwd, values.weights), doc.value.id)}`);
        }
        if (!values.json) {
          const what = o.result === 'refused' ? `refused: ${o.error}` : `${o.result}${o.version ? ` (${o.kind === 'profile' ? 'revision' : 'version'} ${o.version})` : ''}${o.status ? `, checks ${o.status}` : ''}`;
          io.stdout(`${o.kind} ${o.id}: ${what}\n`);
          for (const i of o.issues ?? []) io.stdout(`  ${o.file}: ${i.path}: ${i.message}\n`);
        }
      }
    } catch (e) {
      if (e instanceof ServerError) {
        io.stderr(`error: ${e.message}\n`);
        return EXIT_BAD_INPUT;
      }
      throw e;
    }
    if (values.json) printJson(io, { documents: outcomes, weights: notes, issues: catalog.issues });
    else for (const n of notes) io.stdout(`model ${n}\n`);
    for (const i of catalog.issues) io.stderr(`${i.file}: ${i.path}: ${i.message}\n`);
    const refused = outcomes.filter((o) => o.result === 'refused').length;
    if (!values.json) io.stdout(`${outcomes.length} documents: ${outcomes.length - refused} accepted, ${refused} refused; ${catalog.issues.length} file problems\n`);
    return refused > 0 || catalog.issues.length > 0 ? EXIT_BAD_INPUT : EXIT_OK;
  });
}
