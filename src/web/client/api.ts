import { ApiError, createApiClient, type ApiClient } from '../../api-client/api-client.js';

export { ApiError, type ApiClient };

/** The console's way to the API: the shared client on the page's own origin, the server's sentences as messages. */
export function createConsoleClient(token: string, onUnauthorized: () => void): ApiClient {
  return createApiClient('', token, { onUnauthorized, messages: 'server' });
}

/** Checks a token before keeping it: the API answers with the token's role and what it may call. */
export function fetchWhoAmI(token: string): Promise<WhoAmI> {
  return createApiClient('', token, { messages: 'server' }).get<WhoAmI>('/whoami');
}

export interface WhoAmI {
  id: number;
  label: string;
  role: 'viewer' | 'engineer' | 'operator' | 'admin';
  actor: string;
  /** Keys of the API routes this token may call (src/api/route-table.ts). */
  allowed: string[];
}
