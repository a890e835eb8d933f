import { request } from 'node:http';
import type { ControlEndpoint } from './control-server.js';

/** Calls the agent's local control endpoint; used by `ocellus-agent task|motion|state`. */
export function callControl(endpoint: ControlEndpoint, method: 'GET' | 'POST', path: string, body?: unknown): Promise<{ status: number; body: unknown }> {
  const text = body === undefined ? undefined : JSON.stringify(body);
  const where = endpoint.kind === 'unix' ? { socketPath: endpoint.socketPath } : { host: endpoint.host, port: endpoint.port };
  return new Promise((resolve, reject) => {
    const req = request(
      { ...where, method, path, headers: text ? { 'content-type': 'application/json', 'content-length': Buffer.byteLength(text) } : {}, timeout: 10_000 },
      (res) => {
        const chunks: Buffer[] = [];
        res.on('data', (c: Buffer) => chunks.push(c));
        res.on('end', () => {
          const raw = Buffer.concat(chunks).toString('utf8');
          let parsed: unknown = raw;
          try {
            parsed = JSON.parse(raw);
          } catch {
            // keep the text
          }
          resolve({ status: res.statusCode ?? 0, body: parsed });
        });
      },
    );
    req.on('timeout', () => req.destroy(new Error('the agent did not answer within 10 s')));
    req.on('error', reject);
    req.end(text);
  });
}
