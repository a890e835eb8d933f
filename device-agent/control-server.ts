import { chmodSync, existsSync, unlinkSync } from 'node:fs';
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import { z } from 'zod';
import type { TaskResult } from './profile-runner.js';

/** Where the local control endpoint listens: a loopback TCP port, or a Unix socket. */
export type ControlEndpoint = { kind: 'tcp'; host: string; port: number } | { kind: 'unix'; socketPath: string };

export interface ControlHandlers {
  setTask(task: string): Promise<TaskResult>;
  setMotion(moving: boolean): void;
  state(): unknown;
}

export interface ControlServer {
  endpoint: ControlEndpoint;
  close(): Promise<void>;
}

const taskBody = z.strictObject({ task: z.string().min(1).max(64) });
const motionBody = z.strictObject({ moving: z.boolean() });
const MAX_BODY_BYTES = 16 * 1024;

function reply(res: ServerResponse, status: number, body: unknown) {
  const text = JSON.stringify(body);
  res.writeHead(status, { 'content-type': 'application/json', 'content-length': Buffer.byteLength(text) });
  res.end(text);
}

function readJson(req: IncomingMessage): Promise<{ ok: true; value: unknown } | { ok: false; error: string }> {
  return new Promise((resolve) => {
    const chunks: Buffer[] = [];
    let size = 0;
    req.on('data', (c: Buffer) => {
      size += c.length;
      if (size <= MAX_BODY_BYTES) chunks.push(c);
    });
    req.on('end', () => {
      if (size > MAX_BODY_BYTES) return resolve({ ok: false, error: `body exceeds ${MAX_BODY_BYTES} bytes` });
      try {
        resolve({ ok: true, value: JSON.parse(Buffer.concat(chunks).toString('utf8')) });
      } catch (e) {
        resolve({ ok: false, error: `body is not JSON: ${(e as Error).message}` });
      }
    });
  });
}

/** Host names a local caller uses; anything else is a page that resolved its own name to loopback (DNS rebinding). */
const LOCAL_HOSTS = new Set(['localhost', '127.0.0.1', '[::1]']);

/**
 * Why a request is not from a local program, or null. Browsers send Origin on cross-origin requests (and on
 * every POST); local tools never do. A foreign Host is a rebound name. Only JSON bodies are taken, which a
 * page cannot send cross-origin without a preflight (Fetch standard, CORS-safelisted content types).
 */
export function foreignRequest(req: IncomingMessage, endpoint: ControlEndpoint): { status: number; error: string } | null {
  if (req.headers.origin !== undefined) return { status: 403, error: `requests with an Origin header (${String(req.headers.origin).slice(0, 100)}) are refused: the control endpoint is for local programs, not web pages` };
  const host = req.headers.host;
  if (host === undefined) return endpoint.kind === 'unix' ? null : { status: 400, error: 'a Host header is required' };
  const m = /^(\[[^\]]+\]|[^:]+)(?::(\d+))?$/.exec(host.toLowerCase());
  const port = endpoint.kind === 'tcp' ? String(endpoint.port) : null;
  if (!m || !LOCAL_HOSTS.has(m[1]!) || (m[2] !== undefined && port !== null && m[2] !== port)) {
    return { status: 403, error: `Host ${host.slice(0, 100)} is not this machine's loopback name; refused` };
  }
  if (req.method === 'POST') {
    const type = String(req.headers['content-type'] ?? '').split(';')[0]!.trim().toLowerCase();
    if (type !== 'application/json') return { status: 415, error: `a POST needs Content-Type application/json, got ${type || 'none'}` };
  }
  return null;
}

async function handle(handlers: ControlHandlers, endpoint: ControlEndpoint, req: IncomingMessage, res: ServerResponse) {
  const foreign = foreignRequest(req, endpoint);
  if (foreign) {
    req.resume();
    return reply(res, foreign.status, { ok: false, error: foreign.error });
  }
  const route = `${req.method} ${new URL(req.url ?? '/', 'http://agent').pathname}`;
  if (route === 'GET /state') return reply(res, 200, handlers.state());
  if (route !== 'POST /task' && route !== 'POST /motion') return reply(res, 404, { ok: false, error: `no route ${route}; try POST /task, POST /motion or GET /state` });
  const body = await readJson(req);
  if (!body.ok) return reply(res, 400, { ok: false, error: `${route}: ${body.error}` });
  if (route === 'POST /task') {
    const parsed = taskBody.safeParse(body.value);
    if (!parsed.success) return reply(res, 400, { ok: false, error: `${route}: ${parsed.error.issues[0]!.path.join('.') || '(root)'}: ${parsed.error.issues[0]!.message}` });
    const result = await handlers.setTask(parsed.data.task);
    return reply(res, taskStatus(result), result);
  }
  const parsed = motionBody.safeParse(body.value);
  if (!parsed.success) return reply(res, 400, { ok: false, error: `${route}: ${parsed.error.issues[0]!.path.join('.') || '(root)'}: ${parsed.error.issues[0]!.message}` });
  handlers.setMotion(parsed.data.moving);
  return reply(res, 200, { ok: true, moving: parsed.data.moving });
}

/** A task switch's result as an HTTP status: no release yet is a conflict, an unknown task not found, a failed switch the device's fault. */
function taskStatus(result: TaskResult): number {
  if (result.ok) return 200;
  return result.code === 'no-release-applied' ? 409 : result.code === 'unknown-task' ? 404 : 500;
}

/**
 * The robot's local way to tell the agent what it is doing: `POST /task {task}`, `POST /motion
 * {moving}`, `GET /state`. Listens on a Unix socket (mode 0600: only the agent's user) or on loopback,
 * needs no network, and refuses what a web page could send (see foreignRequest).
 */
export async function startControlServer(endpoint: ControlEndpoint, handlers: ControlHandlers): Promise<ControlServer> {
  let actual: ControlEndpoint = endpoint;
  const server: Server = createServer((req, res) => {
    handle(handlers, actual, req, res).catch((e: unknown) => reply(res, 500, { ok: false, error: (e as Error).message }));
  });
  if (endpoint.kind === 'unix' && existsSync(endpoint.socketPath)) unlinkSync(endpoint.socketPath);
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    if (endpoint.kind === 'unix') server.listen(endpoint.socketPath, resolve);
    else server.listen(endpoint.port, endpoint.host, resolve);
  });
  const address = server.address();
  if (endpoint.kind === 'unix') chmodSync(endpoint.socketPath, 0o600);
  actual = endpoint.kind === 'tcp' && typeof address === 'object' && address ? { kind: 'tcp', host: endpoint.host, port: address.port } : endpoint;
  return {
    endpoint: actual,
    close: () =>
      new Promise<void>((resolve) => {
        server.closeAllConnections();
        server.close(() => resolve());
      }),
  };
}
