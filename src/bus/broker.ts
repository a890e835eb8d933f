import { createServer as createTcpServer, type Server, type Socket } from 'node:net';
import { createServer as createTlsServer, type TLSSocket } from 'node:tls';
import { timingSafeEqual } from 'node:crypto';
import type { Duplex } from 'node:stream';
import aedesModule, { type AuthenticateError, type Client, type createBroker } from 'aedes';

// aedes is CommonJS: its module.exports is the factory, which TypeScript sees as the `default` of the module.
const createAedes = (aedesModule as unknown as { createBroker: typeof createBroker }).createBroker;
import { METRIC_NAMES, type MetricsRegistry } from '../metrics/registry.js';
import { MAX_PAYLOAD_BYTES } from '../protocol/limits.js';
import { isValidDeviceId } from '../protocol/topics.js';
import { createLoginGuard, type LoginGuard, type LoginRefusal } from '../store/login-guard.js';
import { mayPublish, maySubscribe, type BusPrincipal } from './access.js';
import { guardConnection, type PacketLimits } from './packet-guard.js';
import { createRefusalLog } from './refusal-log.js';

/** PEM texts for TLS; with `clientCaPem` every client must present a certificate signed by it. */
export interface BrokerTls {
  certPem: string;
  keyPem: string;
  /**
   * Per-device certificates: every device must present one signed by this CA; its CN is the device id and no
   * password is needed. The server's own account still logs in by password (it may show no certificate).
   */
  clientCaPem?: string;
  /** Revoked device certificates. Checked only at the handshake: revoke the device too, which ends its live session. */
  crlPem?: string;
}

/** What a device credential check answers: a plain yes/no, or the repository's result with its reason. */
export type DeviceCheck = boolean | { ok: true } | { ok: false; reason: 'bad-credentials' | 'revoked' };

export interface EmbeddedBrokerOptions {
  /** Loopback by default; the broker is meant for one site's server. */
  host?: string;
  /** 1884 by default, so it does not collide with a system Mosquitto on 1883. 0 picks a free port. */
  port?: number;
  /** Device credentials: the MQTT username is the device id. */
  authenticate(username: string, password: string): DeviceCheck | Promise<DeviceCheck>;
  /**
   * For a device that logged in with a verified certificate: whether its id is enrolled and not revoked
   * (the CRL is checked only at the handshake; this is checked at every login). Without it, none is.
   */
  certificateAllowed?(deviceId: string): DeviceCheck | Promise<DeviceCheck>;
  /** The server's own account, which may publish and subscribe anywhere. */
  serverUser: { username: string; password: string };
  /**
   * Device connections wait for this (their CONNACK is held back) while the server's own client is let
   * in at once: a device that connected before the server subscribed would publish into nothing.
   */
  devicesAdmitted?: Promise<void>;
  tls?: BrokerTls;
  /** Packet size caps before and after CONNECT (defaults: DEFAULT_PACKET_LIMITS). */
  packetLimits?: Partial<PacketLimits>;
  /** Failed-login limits per source address and per device id (shared with the weights route by the server). */
  loginGuard?: LoginGuard;
  metrics?: MetricsRegistry;
  /** Told when the broker drops a device for silence (nothing within 1.5 × its keep-alive); its last will follows. */
  onKeepaliveMissed?: (deviceId: string) => void;
  log?: (line: string) => void;
}

export interface EmbeddedBroker {
  host: string;
  port: number;
  url: string;
  /** Ends a device's live session at once (after its credentials were revoked or rotated); false when it had none. */
  disconnect(deviceId: string): Promise<boolean>;
  /** Device ids with a live session. */
  sessions(): string[];
  close(): Promise<void>;
}

/**
 * A CONNECT carries at most a will (a state message), a user name and a password; after it the largest
 * message is a signed release, plus room for its topic and properties.
 */
export const DEFAULT_PACKET_LIMITS: PacketLimits = {
  maxConnectBytes: MAX_PAYLOAD_BYTES.state + 4 * 1024,
  maxPacketBytes: Math.max(...Object.values(MAX_PAYLOAD_BYTES)) + 4 * 1024,
};

const principals = new WeakMap<Client, BusPrincipal>();

function sameSecret(a: string, b: string): boolean {
  const x = Buffer.from(a, 'utf8');
  const y = Buffer.from(b, 'utf8');
  return x.length === y.length && timingSafeEqual(x, y);
}

// MQTT 3.1.1 CONNACK return codes (§3.2.2.3): 2 identifier rejected, 4 bad user name or password, 5 not authorized.
function refusal(message: string, returnCode: 2 | 4 | 5 = 4): AuthenticateError {
  return Object.assign(new Error(message), { returnCode }) as AuthenticateError;
}

function normalise(check: DeviceCheck): { ok: true } | { ok: false; reason: 'bad-credentials' | 'revoked' } {
  if (typeof check === 'boolean') return check ? { ok: true } : { ok: false, reason: 'bad-credentials' };
  return check;
}

interface ConnectionFacts {
  source: string;
  /** The CN of a verified client certificate, when the listener asks for one. */
  certificateCn: string | null;
  /** True when the listener has a client CA: a device without a certificate is refused. */
  certificateRequired: boolean;
}

/**
 * Starts an MQTT broker (aedes) on a TCP or TLS port with per-device credentials and per-device topic
 * isolation: a device publishes only its own state/events and subscribes only to its own
 * release/cmd/ack. A device's client id must be its user name, and it has at most one live session:
 * while one is connected, another CONNECT for the same id is refused (the live one wins, so stolen or
 * duplicated credentials cannot knock a robot offline in a loop; a session left half-open ends at its
 * keep-alive, 1.5 × the client's interval, MQTT 3.1.1 §3.1.2.10). Retained messages and sessions live in
 * memory, so they end with the process; the server republishes current releases when its client reconnects.
 */
export async function startEmbeddedBroker(options: EmbeddedBrokerOptions): Promise<EmbeddedBroker> {
  const host = options.host ?? '127.0.0.1';
  const log = options.log ?? (() => {});
  const refused = createRefusalLog(log);
  const guard = options.loginGuard ?? createLoginGuard();
  const limits: PacketLimits = { ...DEFAULT_PACKET_LIMITS, ...options.packetLimits };
  const loginFailures = options.metrics?.counter(METRIC_NAMES.deviceLoginFailures, 'Device logins refused, by where (mqtt, http) and why');
  const oversized = options.metrics?.counter(METRIC_NAMES.mqttOversizedPackets, 'MQTT connections closed for a packet over the size limit, by phase');
  const facts = new WeakMap<Duplex, ConnectionFacts>();
  /** The live session of each device, reserved as soon as its login is accepted. */
  const live = new Map<string, Client>();

  function refuseLogin(reason: LoginRefusal, fields: Record<string, unknown>): void {
    loginFailures?.inc({ via: 'mqtt', reason });
    refused('login', { reason, ...fields });
  }

  const aedes = createAedes({
    authenticate: function authenticateClient(client, username, password, done) {
      const user = username ?? '';
      const secret = password ? password.toString('utf8') : '';
      const conn = facts.get(client.conn as unknown as Duplex) ?? { source: 'unknown', certificateCn: null, certificateRequired: false };
      if (user === options.serverUser.username && conn.certificateCn === null) {
        if (!sameSecret(secret, options.serverUser.password)) return done(refusal('bad server credentials'), false);
        principals.set(client, { kind: 'server' });
        return done(null, true);
      }
      // With a client certificate its CN is the device id; the user name, when given, must agree.
      const deviceId = conn.certificateCn ?? user;
      const where = { source: conn.source, user, clientId: client.id };
      if (!isValidDeviceId(deviceId) || (conn.certificateCn !== null && user !== '' && user !== conn.certificateCn)) {
        refuseLogin('bad-credentials', where);
        return done(refusal('user name is not a device id'), false);
      }
      if (conn.certificateRequired && conn.certificateCn === null) {
        refuseLogin('certificate-required', where);
        return done(refusal('devices log in with their certificate on this listener', 5), false);
      }
      if (client.id !== deviceId) {
        refuseLogin('client-id-mismatch', where);
        return done(refusal(`client id must be the device id ${deviceId}`, 2), false);
      }
      const limited = guard.attempt(deviceId, conn.source);
      if (limited) {
        refuseLogin(limited, where);
        return done(refusal('too many failed logins; try again later', 5), false);
      }
      Promise.resolve(options.devicesAdmitted)
        .then(() => (conn.certificateCn !== null ? (options.certificateAllowed?.(deviceId) ?? false) : options.authenticate(deviceId, secret)))
        .then(
          (check) => {
            const result = normalise(check);
            if (!result.ok) {
              guard.failed(deviceId, conn.source);
              refuseLogin(result.reason, where);
              return done(refusal(`bad credentials for device ${deviceId}`), false);
            }
            guard.succeeded(deviceId, conn.source);
            const holder = live.get(deviceId);
            const holderGone = !holder || holder.closed || (holder.conn as unknown as Duplex).destroyed;
            if (holder && holder !== client && !holderGone) {
              refuseLogin('session-in-use', where);
              return done(refusal(`device ${deviceId} already has a live session`, 2), false);
            }
            live.set(deviceId, client);
            (client.conn as unknown as Duplex).once('close', () => {
              if (live.get(deviceId) === client) live.delete(deviceId);
            });
            principals.set(client, { kind: 'device', deviceId });
            done(null, true);
          },
          (e: unknown) => done(refusal(`credential check failed: ${(e as Error).message}`), false),
        );
    },
    authorizePublish: function authorizeDevicePublish(client, packet, done) {
      // client is null for messages the broker publishes itself.
      if (!client) return done(null);
      const principal = principals.get(client);
      if (principal && mayPublish(principal, packet.topic)) return done(null);
      refused('publish', { topic: packet.topic, by: describe(principal) });
      done(new Error('not allowed to publish there'));
    },
    authorizeSubscribe: function authorizeDeviceSubscribe(client, sub, done) {
      const principal = principals.get(client);
      if (principal && maySubscribe(principal, sub.topic)) return done(null, sub);
      refused('subscribe', { topic: sub.topic, by: describe(principal) });
      // A null subscription makes aedes answer with the failure code 0x80 (MQTT 3.1.1 §3.9.3).
      done(null, null);
    },
  });
  aedes.on('keepaliveTimeout', function keepaliveMissed(client) {
    const principal = principals.get(client);
    if (principal?.kind === 'device') options.onKeepaliveMissed?.(principal.deviceId);
  });

  function admit(socket: Socket, certificateCn: string | null, certificateRequired = false): void {
    const source = socket.remoteAddress ?? 'unknown';
    const connection = guardConnection(socket, limits, (violation) => {
      oversized?.inc({ phase: violation.phase });
      refused('oversized-packet', { source, ...violation, claimedBytes: String(violation.claimedBytes) });
    });
    facts.set(connection, { source, certificateCn, certificateRequired });
    aedes.handle(connection as unknown as Socket);
  }

  let server: Server;
  if (options.tls) {
    const tls = options.tls;
    server = createTlsServer(
      {
        cert: tls.certPem,
        key: tls.keyPem,
        // Certificates are asked for but judged here: the server's own client shows none and logs in by password.
        ...(tls.clientCaPem ? { ca: tls.clientCaPem, requestCert: true, rejectUnauthorized: false } : {}),
        ...(tls.crlPem ? { crl: tls.crlPem } : {}),
        minVersion: 'TLSv1.2',
      },
      (socket: TLSSocket) => {
        if (!tls.clientCaPem) return admit(socket, null);
        const peer = socket.getPeerCertificate();
        const shown = peer && Object.keys(peer).length > 0;
        if (shown && !socket.authorized) {
          // Revoked (the CRL), expired, or signed by another CA: closed before any MQTT byte is read.
          loginFailures?.inc({ via: 'mqtt', reason: 'certificate-refused' });
          refused('certificate', { source: socket.remoteAddress ?? 'unknown', error: String(socket.authorizationError) });
          socket.destroy();
          return;
        }
        const cn = shown ? peer.subject?.CN : undefined;
        admit(socket, typeof cn === 'string' ? cn : null, true);
      },
    );
    server.on('tlsClientError', (e, socket) => {
      refused('tls-handshake', { source: socket.remoteAddress ?? 'unknown', error: e.message });
    });
  } else {
    server = createTcpServer((socket) => admit(socket, null));
  }
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(options.port ?? 1884, host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const address = server.address();
  const port = typeof address === 'object' && address ? address.port : (options.port ?? 1884);
  return {
    host,
    port,
    url: `${options.tls ? 'mqtts' : 'mqtt'}://${host}:${port}`,
    disconnect: function disconnectDevice(deviceId) {
      const client = live.get(deviceId);
      if (!client) return Promise.resolve(false);
      live.delete(deviceId);
      return new Promise<boolean>((resolve) => client.close(() => resolve(true)));
    },
    sessions: () => [...live.keys()],
    close: function closeBroker() {
      return new Promise<void>((resolve) => {
        server.close(() => resolve());
        aedes.close(() => {});
        // Closing the broker ends every client connection, which lets server.close() finish.
      });
    },
  };
}

function describe(principal: BusPrincipal | undefined): string {
  if (!principal) return 'an unauthenticated client';
  return principal.kind === 'server' ? 'the server' : `device ${principal.deviceId}`;
}
