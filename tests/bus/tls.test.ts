import { request as httpsRequest } from 'node:https';
import mqtt, { type MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { busForServer } from '../../src/bus/start-bus.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';
import { deviceClass, removeDir, tempDataDir } from '../support/api-fixtures.js';
import { hasOpenssl, makeDemoPki, type DemoPki } from '../support/tls-certs.js';

// Demo data: row robots gh-a-01 (valid certificate), gh-a-02 (certificate revoked in the CRL), gh-a-03
// (valid certificate, credentials revoked on the server). Certificates are made per run with openssl.
const ADMIN = 'demo-data-admin-token-tls-00000001';

function httpsGet(url: string, caPem: string, path: string): Promise<{ status: number; body: string }> {
  return new Promise((resolve, reject) => {
    const req = httpsRequest(`${url}${path}`, { ca: caPem, headers: { authorization: `Bearer ${ADMIN}` } }, (res) => {
      let body = '';
      res.on('data', (c: Buffer) => (body += c.toString()));
      res.on('end', () => resolve({ status: res.statusCode ?? 0, body }));
    });
    req.on('error', reject);
    req.end();
  });
}

describe.skipIf(!hasOpenssl)('TLS on the HTTP server and the embedded broker, with per-device certificates', () => {
  let pki: DemoPki;
  let dir: string;
  let server: RunningServer;
  let brokerUrl: string;
  const clients: MqttClient[] = [];

  beforeAll(async () => {
    pki = makeDemoPki(['gh-a-01', 'gh-a-02', 'gh-a-03', 'gh-a-04'], ['gh-a-02']);
    dir = tempDataDir();
    server = await startServer({
      dataDir: dir,
      port: 0,
      adminToken: ADMIN,
      tls: { certPem: pki.serverCertPem, keyPem: pki.serverKeyPem },
      bus: busForServer({
        embedded: { port: 0, tls: { certPem: pki.serverCertPem, keyPem: pki.serverKeyPem, clientCaPem: pki.caPem, crlPem: pki.crlPem } },
        serverClientCaPem: pki.caPem,
        eventWriter: 'inline',
      }),
    });
    brokerUrl = server.bus!.replace(/^embedded MQTT broker at /, '');
    const call = (method: string, path: string, body?: unknown) =>
      new Promise<number>((resolve, reject) => {
        const req = httpsRequest(`${server.url}${path}`, { method, ca: pki.caPem, headers: { authorization: `Bearer ${ADMIN}`, 'content-type': 'application/json' } }, (res) => {
          res.resume();
          res.on('end', () => resolve(res.statusCode ?? 0));
        });
        req.on('error', reject);
        req.end(body === undefined ? undefined : JSON.stringify(body));
      });
    expect(await call('POST', '/api/v1/device-classes', deviceClass)).toBe(201);
    for (const id of ['gh-a-01', 'gh-a-02', 'gh-a-03']) expect(await call('POST', '/api/v1/devices', { id, deviceClassId: deviceClass.id, tags: [] })).toBe(201);
    expect(await call('POST', '/api/v1/devices/gh-a-03/revoke')).toBe(200);
  });
  afterAll(async () => {
    for (const c of clients) c.end(true);
    await server?.close();
    removeDir(dir);
    pki?.remove();
  });

  function connectWithCertificate(id: string, options: { username?: string; clientId?: string } = {}): Promise<MqttClient> {
    const { certPem, keyPem } = pki.device(id);
    return mqtt.connectAsync(brokerUrl, {
      clientId: options.clientId ?? id,
      ...(options.username !== undefined ? { username: options.username } : {}),
      cert: certPem,
      key: keyPem,
      ca: pki.caPem,
      reconnectPeriod: 0,
      connectTimeout: 5000,
    }).then((c) => (clients.push(c), c));
  }

  it('serves the API over HTTPS with the given certificate', async () => {
    expect(server.url).toMatch(/^https:\/\/127\.0\.0\.1:\d+$/);
    const res = await httpsGet(server.url, pki.caPem, '/api/v1/devices');
    expect(res.status).toBe(200);
    expect(JSON.parse(res.body).map((d: { id: string }) => d.id)).toContain('gh-a-01');
    // The server's own client reached its broker over TLS with a password (it has no device certificate).
    expect(brokerUrl).toMatch(/^mqtts:\/\//);
  });

  it('lets a device in by its certificate, the CN as its id, with no password', async () => {
    const c = await connectWithCertificate('gh-a-01');
    expect(c.connected).toBe(true);
    await c.endAsync();
  });

  it('refuses a certificate whose CN differs from the user name or the client id', async () => {
    await expect(connectWithCertificate('gh-a-01', { username: 'gh-a-03' })).rejects.toThrow(/Bad username or password/);
    await expect(connectWithCertificate('gh-a-01', { clientId: 'gh-a-03' })).rejects.toThrow(/Identifier rejected/);
  });

  it('closes the handshake of a certificate on the CRL, and of a device connecting with none', async () => {
    // The server closes the TLS connection before any CONNACK: the client sees it close without connecting.
    const { certPem, keyPem } = pki.device('gh-a-02');
    const revoked = mqtt.connect(brokerUrl, { clientId: 'gh-a-02', cert: certPem, key: keyPem, ca: pki.caPem, reconnectPeriod: 0, connectTimeout: 5000 });
    revoked.on('error', () => undefined);
    const outcome = await new Promise<string>((resolve) => {
      const timer = setTimeout(() => resolve('no answer'), 5000);
      revoked.once('connect', () => (clearTimeout(timer), resolve('connected')));
      revoked.once('close', () => (clearTimeout(timer), resolve('closed')));
    });
    revoked.end(true);
    expect(outcome).toBe('closed');
    await expect(mqtt.connectAsync(brokerUrl, { clientId: 'gh-a-01', username: 'gh-a-01', password: 'x', ca: pki.caPem, reconnectPeriod: 0, connectTimeout: 5000 }))
      .rejects.toThrow(/Not authorized/);
    expect(server.metrics.render()).toMatch(/ocellus_device_login_failures_total\{reason="certificate-refused",via="mqtt"\} [1-9]/);
  });

  it('refuses a valid certificate of a device revoked on the server, or not enrolled', async () => {
    await expect(connectWithCertificate('gh-a-03')).rejects.toThrow(/Bad username or password/);
    await expect(connectWithCertificate('gh-a-04')).rejects.toThrow(/Bad username or password/);
  });
});

if (!hasOpenssl) describe('TLS', () => it.skip('skipped: no openssl program to make test certificates', () => {}));
