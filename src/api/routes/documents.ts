import type { Context } from 'hono';
import type { DocumentRecord } from '../../store/documents.js';
import { actorOf } from '../auth.js';
import { createDocument, updateDocument, type StoredDocument } from '../../documents/save.js';
import type { AppEnv, ResolvedDeps } from '../context.js';
import { badRequest, notFound } from '../errors.js';
import { unwrap } from '../refusals.js';
import { DOCUMENT_COLLECTIONS, type DocumentCollection } from '../route-table.js';
import { requestBody, type Router } from '../routing.js';

type Doc = Record<string, unknown> & { id?: string };

function withId(body: Doc, id: string | undefined, noun: string): StoredDocument {
  if (typeof body.id !== 'string') {
    if (id === undefined) throw badRequest(`a ${noun} needs an id to be stored`, [{ path: 'id', message: 'required' }]);
    return { ...body, id };
  }
  if (id !== undefined && body.id !== id) {
    throw badRequest(`the body's id does not match the path`, [{ path: 'id', message: `is '${body.id}', the path names '${id}'` }]);
  }
  return body as StoredDocument;
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

  async function readDocument(c: Context<AppEnv>, pathId?: string): Promise<StoredDocument> {
    const doc = requestBody(c, schema) as Doc;
    return withId(doc, pathId, noun);
  }

  route(`${collection}.list`, (c) => c.json(store.documents.list(kind).map((r) => present(deps, collection, r))));

  route(`${collection}.create`, async (c) => {
    const doc = await readDocument(c);
    const record = unwrap(createDocument(kind, doc, { store, actor: actorOf(c), at: deps.clock.now().toISOString() }));
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
    const record = unwrap(updateDocument(kind, doc, { store, actor: actorOf(c), at: deps.clock.now().toISOString() }));
    return c.json(present(deps, collection, record));
  });

  route(`${collection}.history`, (c) => {
    const id = c.req.param('id') ?? '';
    const history = store.documents.history(kind, id);
    if (history.length === 0) throw notFound(`${noun} '${id}'`);
    return c.json(history);
  });
}
