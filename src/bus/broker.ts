import { createServer, type Server } from 'node:net';
import { timingSafeEqual } from 'node:crypto';
import aedesModule, { type AuthenticateError, type Client, type createBroker } from 'aedes';

// aedes is CommonJS: its module.exports is the factory, which TypeScript sees as the `default` of the module.
const createAedes = (aedesModule as unknown as { createBroker: typeof createBroker }).createBroker;
import { isValidDeviceId } from '../protocol/topics.js';
import { mayPublish, maySubscribe, type BusPrincipal } from './access.js';

export interface EmbeddedBrokerOptions {
  /** Loopback by default; the broker is meant for one site's server. */
  host?: string;
  /** 1884 by default, so it does not collide with a system Mosquitto on 1883. 0 picks a free port. */
  port?: number;
  /** Device credentials: the MQTT username is the device id. */
  authenticate(username: string, password: string): boolean | Promise<boolean>;
  /** The server's own account, which may publish and subscribe anywhere. */
  serverUser: { username: string; password: string };
  /**
   * Device connections wait for this (their CONNACK is held back) while the server's own client is let
   * in at once: a device that connected before the server subscribed would publish into nothing.
   */
  devicesAdmitted?: Promise<void>;
  /** Told when the broker drops a device for silence (nothing within 1.5 × its keep-alive); its last will follows. */
  onKeepaliveMissed?: (deviceId: string) => void;
  log?: (line: string) => void;
}

export interface EmbeddedBroker {
  host: string;
  port: number;
  url: string;
  close(): Promise<void>;
}

const principals = new WeakMap<Client, BusPrincipal>();

function sameSecret(a: string, b: string): boolean {
  const x = Buffer.from(a, 'utf8');
  const y = Buffer.from(b, 'utf8');
  return x.length === y.length && timingSafeEqual(x, y);
}

function refusal(message: string): AuthenticateError {
  // MQTT 3.1.1 CONNACK return code 4: bad user name or password.
  return Object.assign(new Error(message), { returnCode: 4 as const }) as AuthenticateError;
}

/**
 * Starts an MQTT broker (aedes) on a TCP port with per-device credentials and per-device topic
 * isolation: a device publishes only its own state/events and subscribes only to its own
 * release/cmd/ack. Retained messages and sessions live in memory, so they end with the process;
 * the server republishes current releases when its client reconnects.
 */
export async function startEmbeddedBroker(options: EmbeddedBrokerOptions): Promise<EmbeddedBroker> {
  const host = options.host ?? '127.0.0.1';
  const log = options.log ?? (() => {});
  const aedes = createAedes({
    authenticate: function authenticateClient(client, username, password, done) {
      const user = username ?? '';
      const secret = password ? password.toString('utf8') : '';
      if (user === options.serverUser.username) {
        if (!sameSecret(secret, options.serverUser.password)) return done(refusal('bad server credentials'), false);
        principals.set(client, { kind: 'server' });
        return done(null, true);
      }
      if (!isValidDeviceId(user)) return done(refusal('user name is not a device id'), false);
      Promise.resolve(options.devicesAdmitted)
        .then(() => options.authenticate(user, secret))
        .then(
          (ok) => {
            if (!ok) return done(refusal(`bad credentials for device ${user}`), false);
            principals.set(client, { kind: 'device', deviceId: user });
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
      log(`broker: refused publish to ${packet.topic} by ${describe(principal)}`);
      done(new Error(`not allowed to publish to ${packet.topic}`));
    },
    authorizeSubscribe: function authorizeDeviceSubscribe(client, sub, done) {
      const principal = principals.get(client);
      if (principal && maySubscribe(principal, sub.topic)) return done(null, sub);
      log(`broker: refused subscription to ${sub.topic} by ${describe(principal)}`);
      // A null subscription makes aedes answer with the failure code 0x80 (MQTT 3.1.1 §3.9.3).
      done(null, null);
    },
  });
  aedes.on('keepaliveTimeout', function keepaliveMissed(client) {
    const principal = principals.get(client);
    if (principal?.kind === 'device') options.onKeepaliveMissed?.(principal.deviceId);
  });
  const server: Server = createServer((socket) => aedes.handle(socket));
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
    url: `mqtt://${host}:${port}`,
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
