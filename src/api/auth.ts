import type { Context } from 'hono';
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

/**
 * Checks the request's credentials against a route's access rule and returns who is calling.
 * No or unknown credentials: 401. A valid token of too low a role: 403.
 */
export function authorize(c: Context<AppEnv>, access: Access, store: Store): Principal | undefined {
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
    if (!creds || !store.verifyDeviceCredentials(creds.user, creds.password)) {
      throw unauthorized('unknown device or wrong password', scheme);
    }
    return { kind: 'device', deviceId: creds.user, actor: `device:${creds.user}` };
  }
  throw unauthorized(header ? 'unsupported authorization scheme' : 'authorization required: send a bearer token', scheme);
}

/** The actor a change is recorded under. */
export function actorOf(c: Context<AppEnv>): string {
  return c.get('principal')?.actor ?? 'anonymous';
}
