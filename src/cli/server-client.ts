import { UsageError } from './args.js';
import type { CliIo } from './io.js';

export const DEFAULT_SERVER = 'http://127.0.0.1:8080';

/** A refusal from the server: its status and the located issues of its error body. */
export class ServerError extends Error {
  override name = 'ServerError';
  constructor(
    readonly status: number,
    message: string,
    readonly issues: Array<{ path: string; message: string }>,
    readonly body: unknown,
  ) {
    super(message);
  }
}

export interface ServerClient {
  readonly baseUrl: string;
  /** JSON request; a non-2xx answer throws ServerError. */
  json<T>(method: string, path: string, body?: unknown): Promise<T>;
  /** Raw request for bytes (a streamed upload); returns the response whatever its status. */
  raw(method: string, path: string, init: { body: ReadableStream<Uint8Array>; headers?: Record<string, string> }): Promise<Response>;
}

/** A client of a running server from --server/--token, or OCELLUS_TOKEN in the environment. */
export function createServerClient(values: { server?: string | undefined; token?: string | undefined }, io: CliIo): ServerClient {
  const baseUrl = (values.server ?? io.env.OCELLUS_SERVER ?? DEFAULT_SERVER).replace(/\/+$/, '');
  if (!/^https?:\/\/[^/]+/.test(baseUrl)) throw new UsageError(`--server must be an http(s) URL, got '${baseUrl}'`);
  const token = values.token ?? io.env.OCELLUS_TOKEN;
  if (!token) throw new UsageError('give --token or set OCELLUS_TOKEN (create one with: ocellus token create --role operator)');
  const auth = { authorization: `Bearer ${token}` };

  async function send(method: string, path: string, init: RequestInit): Promise<Response> {
    try {
      return await fetch(`${baseUrl}${path}`, { method, ...init });
    } catch (e) {
      throw new ServerError(0, `cannot reach the server at ${baseUrl}: ${(e as Error).cause instanceof Error ? ((e as Error).cause as Error).message : (e as Error).message}`, [], null);
    }
  }

  return {
    baseUrl,
    json: async function json<T>(method: string, path: string, body?: unknown): Promise<T> {
      const res = await send(method, path, {
        headers: { ...auth, ...(body === undefined ? {} : { 'content-type': 'application/json' }) },
        ...(body === undefined ? {} : { body: JSON.stringify(body) }),
      });
      const text = await res.text();
      let parsed: unknown = null;
      try {
        parsed = text ? JSON.parse(text) : null;
      } catch {
        parsed = text;
      }
      if (!res.ok) {
        const err = parsed as { error?: string; issues?: Array<{ path: string; message: string }> } | null;
        throw new ServerError(res.status, `${method} ${path}: ${res.status} ${err?.error ?? res.statusText}`, err?.issues ?? [], parsed);
      }
      return parsed as T;
    },
    raw: function raw(method, path, init) {
      // A stream body needs half-duplex in Node's fetch (the request is sent before the response is read).
      return send(method, path, { body: init.body, headers: { ...auth, ...init.headers }, duplex: 'half' } as RequestInit);
    },
  };
}

/** Prints a server refusal with its located issues; 422 (checks fail) is exit 1, anything else exit 2. */
export function reportServerError(io: CliIo, e: ServerError): number {
  io.stderr(`error: ${e.message}\n${e.issues.map((i) => `  ${i.path}: ${i.message}\n`).join('')}`);
  return e.status === 422 ? 1 : 2;
}

export const CLIENT_FLAGS = {
  server: { type: 'string' },
  token: { type: 'string' },
  json: { type: 'boolean' },
  help: { type: 'boolean' },
} as const;
