import { ApiError, createApiClient, type ApiClient } from '../api-client/api-client.js';
import { UsageError } from './args.js';
import type { CliIo } from './io.js';

export const DEFAULT_SERVER = 'http://127.0.0.1:8080';

/** A client of a running server from --server/--token, or OCELLUS_SERVER / OCELLUS_TOKEN in the environment. */
export function createServerClient(values: { server?: string | undefined; token?: string | undefined }, io: CliIo): ApiClient {
  const baseUrl = (values.server ?? io.env.OCELLUS_SERVER ?? DEFAULT_SERVER).replace(/\/+$/, '');
  if (!/^https?:\/\/[^/]+/.test(baseUrl)) throw new UsageError(`--server must be an http(s) URL, got '${baseUrl}'`);
  const token = values.token ?? io.env.OCELLUS_TOKEN;
  if (!token) throw new UsageError('give --token or set OCELLUS_TOKEN (create one with: ocellus token create --role operator)');
  return createApiClient(baseUrl, token);
}

/** Prints a server refusal with its located issues; 422 (checks fail) is exit 1, anything else exit 2. */
export function reportServerError(io: CliIo, e: ApiError): number {
  io.stderr(`error: ${e.message}\n${e.issues.map((i) => `  ${i.path}: ${i.message}\n`).join('')}`);
  return e.status === 422 ? 1 : 2;
}

export const CLIENT_FLAGS = {
  server: { type: 'string' },
  token: { type: 'string' },
  json: { type: 'boolean' },
  help: { type: 'boolean' },
} as const;
