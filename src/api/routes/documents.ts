import type { Context } from 'hono';
import type { DocumentRecord } from '../../store/documents.js';
import { actorOf } from '../auth.js';
import { recordChange } from '../audit-log.js';
import type { AppEnv, ResolvedDeps } from '../context.js';
import { badRequest, conflict, notFound } from '../errors.js';
import { diffJson } from '../json-diff.js';
import { DOCUMENT_COLLECTIONS, type DocumentCollection } from '../route-table.js';
import { requestBody, type Router } from '../routing.js';

type Doc = Record<string, unknown> & { id?: string };

function withId(body: Doc, id: string | undefined, noun: string): Doc & { id: string } {
  if (typeof body.id !== 'string') {
    if (id === undefined) throw badRequest(`a ${noun} needs an id to be stored`, [{ path: 'id', message: 'required' }]);
    return { ...body, id };
  }
  if (id !== undefined && body.id !== id) {
    throw badRequest(`the body's id does not match the path`, [{ path: 'id', message: `is '${body.id}', the path names '${id}'` }]);
  }
  return body as Doc & { id: string };
}

/** Cross-document references checked before a save: a model must name a stored network. */
function checkReferences(deps: ResolvedDeps, collection: DocumentCollection, doc: Doc): void {
  if (collection === 'models') {
    const networkId = String(doc.networkId);
    if (!deps.store.documents.latest('network', networkId)) {
      throw badRequest(`unknown network '${networkId}'`, [{ path: 'networkId', message: `no network '${networkId}' is stored; push it first` }]);
    }
  }
}

/** Models also say whether their weights are in the blob store. */
function present(deps: ResolvedDeps, collection: DocumentCollection, record: DocumentRecord) {
  if (collection !== 'models') return record;
  const sha256 = (record.document as { sha256: string }).sha256;
  const size = deps.blobs.sizeOf(sha256);
  return { ...record, weights: { uploaded: size !== null, path: `/api/v1/models/${record.id}/weights` } };
}

/** Create, list, read, update (new version) and history of device classes, networks, tasks and models. */
export function registerDocumentRoutes(route: Router, deps: ResolvedDeps, collection: DocumentCollection): void {
  const { kind, schema, noun } = DOCUMENT_COLLECTIONS[collection];
  const { store } = deps;

  async function readDocument(c: Context<AppEnv>, pathId?: string): Promise<Doc & { id: string }> {
    const doc = requestBody(c, schema) as Doc;
    return withId(doc, pathId, noun);
  }

  route(`${collection}.list`, (c) => c.json(store.documents.list(kind).map((r) => present(deps, collection, r))));

  route(`${collection}.create`, async (c) => {
    const doc = await readDocument(c);
    checkReferences(deps, collection, doc);
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const record = store.transaction(() => {
      const created = store.documents.create(kind, doc.id, doc, actor, at);
      if (!created) throw conflict(`${noun} '${doc.id}' already exists; use PUT to save a new version`);
      recordChange(store, { at, actor, action: `${kind}.create`, target: `${kind}/${doc.id}`, detail: { version: 1 } });
      return created;
    });
    return c.json(present(deps, collection, record), 201);
  });

  route(`${collection}.read`, (c) => {
    const record = store.documents.latest(kind, c.req.param('id') ?? '');
    if (!record) throw notFound(`${noun} '${c.req.param('id')}'`);
    return c.json(present(deps, collection, record));
  });

  route(`${collection}.update`, async (c) => {
    const id = c.req.param('id') ?? '';
    const doc = await readDocument(c, id);
    checkReferences(deps, collection, doc);
    const at = deps.clock.now().toISOString();
    const actor = actorOf(c);
    const record = store.transaction(() => {
      const before = store.documents.latest(kind, id);
      if (!before) throw notFound(`${noun} '${id}' (use POST to create it)`);
      const saved = store.documents.update(kind, id, doc, actor, at)!;
      const changed = diffJson(before.document, doc).map((ch) => ch.path);
      recordChange(store, { at, actor, action: `${kind}.update`, target: `${kind}/${id}`, detail: { version: saved.version, changed } });
      return saved;
    });
    return c.json(present(deps, collection, record));
  });

  route(`${collection}.history`, (c) => {
    const id = c.req.param('id') ?? '';
    const history = store.documents.history(kind, id);
    if (history.length === 0) throw notFound(`${noun} '${id}'`);
    return c.json(history);
  });
}
