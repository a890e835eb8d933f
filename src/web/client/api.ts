/** A refusal or failure of the API, with the located issues its JSON error body carries. */
export class ApiError extends Error {
  override name = 'ApiError';
  constructor(
    readonly status: number,
    message: string,
    readonly issues: Array<{ path: string; message: string }> = [],
    readonly body: Record<string, unknown> = {},
  ) {
    super(message);
  }
}

export interface ApiClient {
  get<T>(path: string, query?: Record<string, string | number | undefined>): Promise<T>;
  send<T>(method: 'POST' | 'PUT' | 'PATCH' | 'DELETE', path: string, body?: unknown): Promise<T>;
  /** A streaming GET (server-sent events); the caller reads and cancels the body. */
  stream(path: string, signal: AbortSignal): Promise<Response>;
}

export const API_BASE = '/api/v1';

function withQuery(path: string, query: Record<string, string | number | undefined> = {}): string {
  const params = new URLSearchParams();
  for (const [k, v] of Object.entries(query)) if (v !== undefined && v !== '') params.set(k, String(v));
  const qs = params.toString();
  return `${API_BASE}${path}${qs ? `?${qs}` : ''}`;
}

async function readError(res: Response): Promise<ApiError> {
  let body: Record<string, unknown> = {};
  try {
    body = (await res.json()) as Record<string, unknown>;
  } catch {
    // Not JSON (a proxy's page, say): the status line is all there is.
  }
  const message = typeof body.error === 'string' ? body.error : `${res.status} ${res.statusText}`;
  const issues = Array.isArray(body.issues) ? (body.issues as Array<{ path: string; message: string }>) : [];
  return new ApiError(res.status, message, issues, body);
}

/** The console's one way to the API: a bearer token on every call, JSON in and out, errors as ApiError. */
export function createApiClient(token: string, onUnauthorized: () => void): ApiClient {
  const auth = { authorization: `Bearer ${token}` };
  async function call<T>(method: string, url: string, body?: unknown): Promise<T> {
    const res = await fetch(url, {
      method,
      headers: body === undefined ? auth : { ...auth, 'content-type': 'application/json' },
      ...(body !== undefined ? { body: JSON.stringify(body) } : {}),
    });
    if (res.status === 401) onUnauthorized();
    if (!res.ok) throw await readError(res);
    return (await res.json()) as T;
  }
  return {
    get: (path, query) => call('GET', withQuery(path, query)),
    send: (method, path, body) => call(method, withQuery(path), body),
    stream: async function stream(path, signal) {
      const res = await fetch(withQuery(path), { headers: { ...auth, accept: 'text/event-stream' }, signal });
      if (res.status === 401) onUnauthorized();
      if (!res.ok || !res.body) throw await readError(res);
      return res;
    },
  };
}

/** Checks a token before keeping it: the API answers with the token's role and what it may call. */
export async function fetchWhoAmI(token: string): Promise<WhoAmI> {
  const res = await fetch(withQuery('/whoami'), { headers: { authorization: `Bearer ${token}` } });
  if (!res.ok) throw await readError(res);
  return (await res.json()) as WhoAmI;
}

export interface WhoAmI {
  id: number;
  label: string;
  role: 'viewer' | 'engineer' | 'operator' | 'admin';
  actor: string;
  /** Keys of the API routes this token may call (src/api/route-table.ts). */
  allowed: string[];
}
