/** A refusal from the server (or status 0 when it cannot be reached): the call, the status and the located issues. */
export class ApiError extends Error {
  override name = 'ApiError';
  constructor(
    readonly status: number,
    message: string,
    readonly issues: Array<{ path: string; message: string }>,
    readonly body: unknown,
  ) {
    super(message);
  }
}

/** A client of the Ocellus HTTP API, as an operator's tools use it: bearer token, JSON in and out. */
export interface ApiClient {
  readonly baseUrl: string;
  /** JSON request; a non-2xx answer throws ApiError with the server's issues. */
  json<T>(method: string, path: string, body?: unknown): Promise<T>;
  /** GET of a binary answer (e.g. a recording); a non-2xx answer throws ApiError like json(). */
  bytes(path: string): Promise<Uint8Array>;
  /** Raw request (a streamed upload); returns the response whatever its status. */
  raw(method: string, path: string, init: { body: ReadableStream<Uint8Array> | Uint8Array<ArrayBuffer>; headers?: Record<string, string> }): Promise<Response>;
}

function describe(method: string, path: string, status: number, statusText: string, body: unknown): { message: string; issues: Array<{ path: string; message: string }> } {
  const b = body as { error?: string; issues?: Array<{ path: string; message: string }> } | null;
  const issues = Array.isArray(b?.issues) ? b.issues : [];
  return { message: `${method} ${path}: ${status} ${b?.error ?? statusText}`.trim(), issues };
}

async function readBody(res: Response): Promise<unknown> {
  const text = await res.text();
  try {
    return text ? JSON.parse(text) : null;
  } catch {
    return text;
  }
}

export function createApiClient(baseUrl: string, token: string): ApiClient {
  const base = baseUrl.replace(/\/+$/, '');
  const auth = { authorization: `Bearer ${token}` };

  async function send(method: string, path: string, init: RequestInit): Promise<Response> {
    try {
      return await fetch(`${base}${path}`, { method, ...init });
    } catch (e) {
      const cause = (e as Error).cause instanceof Error ? ((e as Error).cause as Error).message : (e as Error).message;
      throw new ApiError(0, `cannot reach the server at ${base}: ${cause}`, [], null);
    }
  }

  return {
    baseUrl: base,
    json: async function json<T>(method: string, path: string, body?: unknown): Promise<T> {
      const res = await send(method, path, {
        headers: { ...auth, ...(body === undefined ? {} : { 'content-type': 'application/json' }) },
        ...(body === undefined ? {} : { body: JSON.stringify(body) }),
      });
      const parsed = await readBody(res);
      if (!res.ok) {
        const { message, issues } = describe(method, path, res.status, res.statusText, parsed);
        throw new ApiError(res.status, message, issues, parsed);
      }
      return parsed as T;
    },
    bytes: async function bytes(path) {
      const res = await send('GET', path, { headers: auth });
      if (!res.ok) {
        const { message, issues } = describe('GET', path, res.status, res.statusText, await readBody(res));
        throw new ApiError(res.status, message, issues, null);
      }
      return new Uint8Array(await res.arrayBuffer());
    },
    raw: function raw(method, path, init) {
      // A stream body needs half-duplex in Node's fetch (the request is sent before the response is read).
      return send(method, path, { body: init.body, headers: { ...auth, ...init.headers }, duplex: 'half' } as RequestInit);
    },
  };
}
