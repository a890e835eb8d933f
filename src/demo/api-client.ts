/** A refusal from the server while setting up the demo: the call, the status and the server's located issues. */
export class DemoApiError extends Error {
  override name = 'DemoApiError';
  constructor(
    readonly status: number,
    message: string,
    readonly body: unknown,
  ) {
    super(message);
  }
}

export interface DemoApi {
  json<T>(method: string, path: string, body?: unknown): Promise<T>;
  upload(path: string, bytes: Uint8Array<ArrayBuffer>): Promise<void>;
}

function describe(method: string, path: string, status: number, body: unknown): string {
  const b = body as { error?: string; issues?: Array<{ path: string; message: string }> } | null;
  const issues = (b?.issues ?? []).slice(0, 5).map((i) => `${i.path}: ${i.message}`).join('; ');
  return `${method} ${path}: ${status} ${b?.error ?? ''}${issues ? ` (${issues})` : ''}`.trim();
}

/** The demo talks to its own server through the public HTTP API, as an operator's tools would. */
export function createDemoApi(baseUrl: string, token: string): DemoApi {
  const auth = { authorization: `Bearer ${token}` };
  async function read(res: Response): Promise<unknown> {
    const text = await res.text();
    try {
      return text ? JSON.parse(text) : null;
    } catch {
      return text;
    }
  }
  return {
    json: async function json<T>(method: string, path: string, body?: unknown): Promise<T> {
      const res = await fetch(`${baseUrl}${path}`, {
        method,
        headers: { ...auth, ...(body === undefined ? {} : { 'content-type': 'application/json' }) },
        ...(body === undefined ? {} : { body: JSON.stringify(body) }),
      });
      const parsed = await read(res);
      if (!res.ok) throw new DemoApiError(res.status, describe(method, path, res.status, parsed), parsed);
      return parsed as T;
    },
    upload: async function upload(path, bytes) {
      const res = await fetch(`${baseUrl}${path}`, {
        method: 'PUT',
        headers: { ...auth, 'content-type': 'application/octet-stream' },
        body: bytes,
      });
      const parsed = await read(res);
      if (!res.ok) throw new DemoApiError(res.status, describe('PUT', path, res.status, parsed), parsed);
    },
  };
}
