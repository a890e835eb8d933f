import type { Context } from 'hono';
import { METRIC_NAMES, type MetricsRegistry } from '../metrics/registry.js';
import type { LoginGuard } from '../store/login-guard.js';
import type { Store } from '../store/store.js';
import type { TokenRecord } from '../store/tokens.js';
import type { AppEnv, Principal } from './context.js';
import { HttpError } from './errors.js';
import { roleAtLeast, type Access } from './roles.js';

/** The name a token acts under in the audit log: its label and id, so two tokens with one label stay apart. */
export function actorOfToken(token: TokenRecord): string {
  return `${token.label}#${token.id}`;
}

function unauthorized(message: string, scheme: string): HttpError {
  return new HttpError(401, message, { headers: { 'WWW-Authenticate': scheme } });
}

function parseBasic(header: string): { user: string; password: string } | null {
  const encoded = header.slice('basic '.length).trim();
  const decoded = Buffer.from(encoded, 'base64').toString('utf8');
  const colon = decoded.indexOf(':');
  return colon < 0 ? null : { user: decoded.slice(0, colon), password: decoded.slice(colon + 1) };
}

/** The peer's address under @hono/node-server; 'unknown' for in-process requests (tests' app.request). */
export function sourceOf(c: Context<AppEnv>): string {
  const env = c.env as { incoming?: { socket?: { remoteAddress?: string } } } | undefined;
  return env?.incoming?.socket?.remoteAddress ?? 'unknown';
}

export interface AuthDeps {
  store: Store;
  loginGuard: LoginGuard;
  metrics: MetricsRegistry;
}

/**
 * Checks the request's credentials against a route's access rule and returns who is calling.
 * No or unknown credentials: 401. A valid token of too low a role: 403. A device's Basic credentials go
 * through the same failed-login limits as the broker's (429 past them) and never a slow KDF on this thread.
 */
export async function authorize(c: Context<AppEnv>, access: Access, deps: AuthDeps): Promise<Principal | undefined> {
  const { store } = deps;
  if (access === 'public') return undefined;
  const header = c.req.header('authorization') ?? '';
  const scheme = access === 'viewer-or-device' ? 'Bearer, Basic realm="ocellus devices"' : 'Bearer';
  const lower = header.toLowerCase();
  if (lower.startsWith('bearer ')) {
    const token = store.tokens.authenticate(header.slice('bearer '.length).trim());
    if (!token) throw unauthorized('unknown or revoked token', scheme);
    const required = access === 'viewer-or-device' ? 'viewer' : access;
    if (!roleAtLeast(token.role, required)) {
      throw new HttpError(403, `this needs the ${required} role; the token has ${token.role}`);
    }
    return { kind: 'token', token, actor: actorOfToken(token) };
  }
  if (lower.startsWith('basic ') && access === 'viewer-or-device') {
    const creds = parseBasic(header);
    if (!creds) throw unauthorized('unknown device or wrong password', scheme);
    const failures = deps.metrics.counter(METRIC_NAMES.deviceLoginFailures, 'Device logins refused, by where (mqtt, http) and why');
    const source = sourceOf(c);
    const limited = deps.loginGuard.attempt(creds.user, source);
    if (limited) {
      failures.inc({ via: 'http', reason: limited });
      throw new HttpError(429, 'too many failed device logins; try again later', { headers: { 'Retry-After': '60' } });
    }
    const result = await store.devices.checkLogin(creds.user, creds.password);
    if (!result.ok) {
      deps.loginGuard.failed(creds.user, source);
      failures.inc({ via: 'http', reason: result.reason });
      throw unauthorized('unknown device or wrong password', scheme);
    }
    deps.loginGuard.succeeded(creds.user, source);
    return { kind: 'device', deviceId: creds.user, actor: `device:${creds.user}` };
  }
  throw unauthorized(header ? 'unsupported authorization scheme' : 'authorization required: send a bearer token', scheme);
}

/** The actor a change is recorded under. */
export function actorOf(c: Context<AppEnv>): string {
  return c.get('principal')?.actor ?? 'anonymous';
}
