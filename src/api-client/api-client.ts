/**
 * The one fetch-based client of the Ocellus HTTP API, shared by the CLI, the demo and the web console: a
 * bearer token on every call, JSON in and out, refusals as ApiError with the server's located issues.
 * Uses only fetch and web streams, so it runs in Node and in the browser alike.
 */

/** The API's prefix; `get` and `send` take paths below it, `json`, `bytes` and `raw` whole paths. */
export const API_BASE = '/api/v1';

/** A refusal from the server (or status 0 when it cannot be reached): the status, a message and the located issues. */
export class ApiError extends Error {
  override name = 'ApiError';
  constructor(
    readonly status: number,
    message: string,
    readonly issues: Array<{ path: string; message: string }> = [],
    readonly body: unknown = null,
  ) {
    super(message);
  }
}

export type Query = Record<string, string | number | undefined>;

export interface ApiClient {
  /** '' for the page's own origin (the console). */
  readonly baseUrl: string;
  /** JSON request to a whole path; a non-2xx answer throws ApiError with the server's issues. */
  json<T>(method: string, path: string, body?: unknown): Promise<T>;
  /** JSON GET of a path below API_BASE, with query parameters (empty ones left out). */
  get<T>(path: string, query?: Query): Promise<T>;
  /** JSON request with a body to a path below API_BASE. */
  send<T>(method: 'POST' | 'PUT' | 'PATCH' | 'DELETE', path: string, body?: unknown): Promise<T>;
  /** GET of a binary answer (e.g. a recording); a non-2xx answer throws ApiError like json(). */
  bytes(path: string): Promise<Uint8Array>;
  /** A streaming GET below API_BASE (server-sent events); the caller reads and cancels the body. */
  stream(path: string, signal: AbortSignal): Promise<Response>;
  /** Raw request (a streamed upload); returns the response whatever its status. */
  raw(method: string, path: string, init: { body: ReadableStream<Uint8Array> | Uint8Array<ArrayBuffer>; headers?: Record<string, string> }): Promise<Response>;
}

export interface ApiClientOptions {
  /** Called on every 401 (the console signs out). */
  onUnauthorized?: () => void;
  /**
   * How an error's message reads: 'request' names the call ("POST /api/v1/x: 409 …", for a terminal),
   * 'server' is the server's own sentence (for a page that shows it beside the form).
   */
  messages?: 'request' | 'server';
}

export function withQuery(path: string, query: Query = {}): string {
  const params = new URLSearchParams();
  for (const [k, v] of Object.entries(query)) if (v !== undefined && v !== '') params.set(k, String(v));
  const qs = params.toString();
  return `${API_BASE}${path}${qs ? `?${qs}` : ''}`;
}

async function readBody(res: Response): Promise<unknown> {
  const text = await res.text();
  try {
    return text ? JSON.parse(text) : null;
  } catch {
    // Not JSON (a proxy's page, say): the text is all there is.
    return text;
  }
}

export function createApiClient(baseUrl: string, token: string, options: ApiClientOptions = {}): ApiClient {
  const base = baseUrl.replace(/\/+$/, '');
  const auth = { authorization: `Bearer ${token}` };
  const style = options.messages ?? 'request';

  function errorOf(method: string, path: string, res: Response, body: unknown): ApiError {
    const b = body as { error?: unknown; issues?: unknown } | null;
    const issues = Array.isArray(b?.issues) ? (b.issues as Array<{ path: string; message: string }>) : [];
    const said = typeof b?.error === 'string' ? b.error : null;
    const message = style === 'server' ? (said ?? `${res.status} ${res.statusText}`) : `${method} ${path}: ${res.status} ${said ?? res.statusText}`.trim();
    return new ApiError(res.status, message, issues, body);
  }

  async function send(method: string, path: string, init: RequestInit): Promise<Response> {
    let res: Response;
    try {
      res = await fetch(`${base}${path}`, { method, ...init });
    } catch (e) {
      if ((e as Error).name === 'AbortError') throw e;
      const cause = (e as Error).cause instanceof Error ? ((e as Error).cause as Error).message : (e as Error).message;
      throw new ApiError(0, `cannot reach the server at ${base || 'this page'}: ${cause}`);
    }
    if (res.status === 401) options.onUnauthorized?.();
    return res;
  }

  async function json<T>(method: string, path: string, body?: unknown): Promise<T> {
    const res = await send(method, path, {
      headers: { ...auth, ...(body === undefined ? {} : { 'content-type': 'application/json' }) },
      ...(body === undefined ? {} : { body: JSON.stringify(body) }),
    });
    const parsed = await readBody(res);
    if (!res.ok) throw errorOf(method, path, res, parsed);
    return parsed as T;
  }

  return {
    baseUrl: base,
    json,
    get: (path, query) => json('GET', withQuery(path, query)),
    send: (method, path, body) => json(method, withQuery(path), body),
    bytes: async function bytes(path) {
      const res = await send('GET', path, { headers: auth });
      if (!res.ok) throw errorOf('GET', path, res, await readBody(res));
      return new Uint8Array(await res.arrayBuffer());
    },
    stream: async function stream(path, signal) {
      const url = withQuery(path);
      const res = await send('GET', url, { headers: { ...auth, accept: 'text/event-stream' }, signal });
      if (!res.ok || !res.body) throw errorOf('GET', url, res, await readBody(res));
      return res;
    },
    raw: function raw(method, path, init) {
      // A stream body needs half-duplex in Node's fetch (the request is sent before the response is read).
      return send(method, path, { body: init.body, headers: { ...auth, ...init.headers }, duplex: 'half' } as RequestInit);
    },
  };
}
