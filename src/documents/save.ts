import { refuse, type Outcome } from '../schema/refusal.js';
import type { DocumentRecord, VersionedKind } from '../store/documents.js';
import type { Store } from '../store/store.js';
import { diffJson } from './json-diff.js';

/** Why a document save was refused: it names a document that is not stored, or clashes with what is. */
export type DocumentSaveRefusalCode = 'references-not-stored' | 'document-exists' | 'document-not-found';

export interface DocumentSaveContext {
  store: Store;
  actor: string;
  at: string;
}

/** A stored document (device class, network, task or model) with the id it is stored under. */
export type StoredDocument = Record<string, unknown> & { id: string };

/** What a kind of document is called in messages ("device class", "model"). */
const NOUN: Record<VersionedKind, string> = { 'device-class': 'device class', network: 'network', task: 'task', model: 'model' };

/** Cross-document references checked before a save: a model must name a stored network. */
function unstoredReferences(store: Store, kind: VersionedKind, doc: StoredDocument) {
  if (kind !== 'model') return null;
  const networkId = String(doc.networkId);
  if (store.documents.latest('network', networkId)) return null;
  return refuse('references-not-stored', `unknown network '${networkId}'`, [{ path: 'networkId', message: `no network '${networkId}' is stored; push it first` }]);
}

/** Version 1 of a new document, with its audit entry, in one transaction. */
export function createDocument(kind: VersionedKind, doc: StoredDocument, ctx: DocumentSaveContext): Outcome<DocumentRecord, DocumentSaveRefusalCode> {
  const { store, actor, at } = ctx;
  const unstored = unstoredReferences(store, kind, doc);
  if (unstored) return unstored;
  return store.transaction(() => {
    const created = store.documents.create(kind, doc.id, doc, actor, at);
    if (!created) return refuse('document-exists', `${NOUN[kind]} '${doc.id}' already exists; use PUT to save a new version`);
    store.audit.record({ at, actor, action: `${kind}.create`, target: `${kind}/${doc.id}`, detail: { version: 1 } });
    return { ok: true as const, value: created };
  });
}

/** The next version of a stored document; its audit entry names the fields that changed. */
export function updateDocument(kind: VersionedKind, doc: StoredDocument, ctx: DocumentSaveContext): Outcome<DocumentRecord, DocumentSaveRefusalCode> {
  const { store, actor, at } = ctx;
  const unstored = unstoredReferences(store, kind, doc);
  if (unstored) return unstored;
  return store.transaction(() => {
    const before = store.documents.latest(kind, doc.id);
    const saved = before ? store.documents.update(kind, doc.id, doc, actor, at) : null;
    if (!before || !saved) return refuse('document-not-found', `${NOUN[kind]} '${doc.id}' (use POST to create it) not found`);
    const changed = diffJson(before.document, doc).map((ch) => ch.path);
    store.audit.record({ at, actor, action: `${kind}.update`, target: `${kind}/${doc.id}`, detail: { version: saved.version, changed } });
    return { ok: true as const, value: saved };
  });
}
