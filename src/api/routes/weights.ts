import { Readable } from 'node:stream';
import type { Model } from '../../schema/model.js';
import { actorOf } from '../auth.js';
import { streamChunks } from '../body.js';
import type { ResolvedDeps } from '../context.js';
import { HttpError, notFound } from '../errors.js';
import { decideRange, etagMatches } from '../http-range.js';
import { weightsQuerySchema } from '../request-schemas.js';
import { requestQuery, type Router } from '../routing.js';
import { weightsInScope } from '../../release/download-scope.js';
import { uploadWeights } from '../../documents/weights.js';
import { unwrap } from '../refusals.js';

/** Streamed, hash-checked upload and resumable, cache-validated download of model weights. */
export function registerWeightsRoutes(route: Router, deps: ResolvedDeps): void {
  const { store, blobs } = deps;

  route('models.weights.upload', async (c) => {
    const id = c.req.param('id') ?? '';
    const model = store.documents.latest<Model>('model', id);
    if (!model) throw notFound(`model '${id}'`);
    const { sizeBytes } = model.document;
    const max = deps.limits.maxWeightsBytes;
    const declared = Number(c.req.header('content-length'));
    if (Number.isFinite(declared) && declared > sizeBytes && declared <= max) {
      throw new HttpError(413, `weights are larger than the ${sizeBytes} bytes model '${id}' declares`, { issues: [{ path: 'body', message: `${declared} bytes` }] });
    }
    if (Number.isFinite(declared) && declared > max) {
      throw new HttpError(413, `weights are larger than the ${max}-byte limit`, { issues: [{ path: 'body', message: `${declared} bytes` }] });
    }
    const stored = await uploadWeights(id, streamChunks(c.req.raw.body), { store, blobs, actor: actorOf(c), now: () => deps.clock.now().toISOString(), maxBytes: max });
    return c.json(unwrap(stored), 201);
  });

  route('models.weights.download', (c) => {
    const id = c.req.param('id') ?? '';
    const query = requestQuery(c, weightsQuerySchema);
    const history = store.documents.history<Model>('model', id);
    if (history.length === 0) throw notFound(`model '${id}'`);
    // Without ?sha256 the latest version's weights; with it, those of any version of this model (older releases).
    const sha256 = query.sha256 ?? history[history.length - 1]!.document.sha256;
    if (!history.some((v) => v.document.sha256 === sha256)) throw notFound(`weights ${sha256} of model '${id}'`);
    const principal = c.get('principal');
    if (principal?.kind === 'device') {
      if (!weightsInScope(store, principal.deviceId, store.deviceStates.get(principal.deviceId)).has(sha256)) {
        throw new HttpError(403, `device '${principal.deviceId}' may download only the weights of its assigned or reported releases`, {
          issues: [{ path: 'query.sha256', message: `${sha256} (model '${id}') is in none of them` }],
        });
      }
    }
    const size = blobs.sizeOf(sha256);
    if (size === null) throw notFound(`weights of model '${id}' (${sha256}) — not uploaded yet`);

    const etag = `"${sha256}"`;
    const common = { ETag: etag, 'Accept-Ranges': 'bytes', 'Cache-Control': 'no-cache' };
    if (etagMatches(c.req.header('if-none-match'), etag)) return c.body(null, 304, common);

    // If-Range (RFC 9110 §13.1.5): resume only when the client's copy is of these same bytes.
    const ifRange = c.req.header('if-range');
    const rangeHeader = ifRange !== undefined && ifRange.trim() !== etag ? undefined : c.req.header('range');
    const decision = decideRange(rangeHeader, size);
    if (decision.kind === 'unsatisfiable') {
      throw new HttpError(416, `range not satisfiable: the weights are ${size} bytes`, {
        issues: [{ path: 'headers.range', message: String(rangeHeader) }],
        headers: { 'Content-Range': `bytes */${size}` },
      });
    }
    const head = c.req.method === 'HEAD';
    const range = decision.kind === 'partial' ? { start: decision.start, end: decision.end } : undefined;
    const length = range ? range.end - range.start + 1 : size;
    const body = head || length === 0 ? null : (Readable.toWeb(blobs.read(sha256, range)) as unknown as ReadableStream<Uint8Array>);
    const headers: Record<string, string> = { ...common, 'Content-Type': 'application/octet-stream', 'Content-Length': String(length) };
    if (range) headers['Content-Range'] = `bytes ${range.start}-${range.end}/${size}`;
    const status = range ? 206 : 200;
    return body === null ? c.body(null, status, headers) : c.body(body, status, headers);
  });
}
