import type { AddressInfo } from 'node:net';
import { createServer as createHttpsServer } from 'node:https';
import { serve, type ServerType } from '@hono/node-server';
import { createApp, createChangeFeed, createSigner, type Clock } from '../api/index.js';
import type { FreshnessPublisher } from '../protocol/freshness.js';
import type { ReleasePublisher } from '../protocol/release.js';
import { createFreshnessService, type FreshnessServiceOptions } from '../release/freshness-statements.js';
import { createCalibrationEngine, type CalibrationEngineOptions } from '../fleet/calibration/engine.js';
import { createRolloutEngine, type RolloutEngineOptions } from '../fleet/rollout/engine.js';
import { createMetricsRegistry, type MetricsRegistry } from '../metrics/registry.js';
import { generateSigningKeyPair } from '../protocol/signing.js';
import { createBlobStore, createLoginGuard, loadKeyChain, loadOrCreateSigningKey, openStore, type LoginGuard, type Store } from '../store/index.js';
import { seedAdminToken, type AdminSeed } from './admin-seed.js';
import { createLeaseLock, createSoleLock } from '../fleet/leader-lock.js';
import { startFleetDuties, type FleetDuties } from './fleet-duties.js';
import { fleetChangeSchema, type FleetChange } from '../api/change-feed.js';

/** What the bus hook is handed: the open store and the metrics registry, both shared with the HTTP API. */
export interface BusContext {
  store: Store;
  metrics: MetricsRegistry;
  log: (line: string) => void;
  /** Failed device logins, shared with the weights route so both count against the same limits. */
  loginGuard: LoginGuard;
}

/** What a started bus gives back: the publisher assignments use, a description for the log, and how to stop it. */
export interface BusAttachment {
  publisher: ReleasePublisher;
  /** Where the periodically re-signed freshness statements of the device classes go. */
  freshness?: FreshnessPublisher;
  /** e.g. the broker URL devices connect to; logged and returned by startServer. */
  description?: string;
  /** Calls the listener with the devices whose state or events the bus just stored; feeds the console's live updates. */
  onDevicesStored?(listener: (deviceIds: string[]) => void): () => void;
  /** Ends a device's live session at once (revocation, rotation). */
  disconnectDevice?(deviceId: string): Promise<'closed' | 'none' | 'external-broker'>;
  /** Replicas: the change feed between this server and the others on the same broker. */
  relay?: { send(change: unknown): void; onRemote(listener: (change: unknown, fromReplica: string) => void): () => void };
  close(): Promise<void>;
}

/** This server as one of several replicas: who it is in the leader lease, and how often it polls the lease. */
export interface ReplicaOptions {
  /** Unique among the replicas (e.g. host name and process id). */
  replicaId: string;
  /** How often the leader lease is renewed or tried, in ms (1,000 by default); a dead leader is replaced within about 5 polls. */
  leaderPollMs?: number;
}

export interface StartServerOptions {
  /** Folder of the database, the weights and the signing key; created when missing. */
  dataDir: string;
  /**
   * A postgres:// URL: the store lives there instead of the data folder's SQLite file. Keys and weights stay in
   * the data folder, which every replica on that database must share.
   */
  databaseUrl?: string;
  /** Loopback by default: the server is meant for one site's network. */
  host?: string;
  /** 8080 by default; 0 picks a free port. */
  port?: number;
  /** Largest model weights upload, in bytes. */
  maxWeightsBytes?: number;
  /** Seeds an admin token with this secret when the store has no tokens yet (first start). */
  adminToken?: string;
  clock?: Clock;
  log?: (line: string) => void;
  /**
   * Starts the MQTT side (embedded broker or a connection to an external one, and the bridge) once the store
   * is open and before HTTP listens. Its publisher is handed to the API's release assignments; it is closed
   * first on shutdown. Without it the server records assignments but cannot send them.
   */
  bus?: (context: BusContext) => Promise<BusAttachment>;
  /** The rollout engine's timing (tick, calibration refresh, drift tolerance); tests shorten them. */
  fleet?: Omit<RolloutEngineOptions, 'log'> & Omit<CalibrationEngineOptions, 'log'>;
  /** How often freshness statements are re-signed and how long each holds (1 h and 24 h by default). */
  freshness?: Pick<FreshnessServiceOptions, 'periodMs' | 'lifetimeMs' | 'checkEveryMs'>;
  /** The built web console served on `/` (default: dist/console, built by npm install). */
  consoleDir?: string;
  /** Serve HTTPS with this certificate and key (PEM) instead of plain HTTP. */
  tls?: { certPem: string; keyPem: string };
  /**
   * Run as one of several replicas on a shared store and broker: the rollout and calibration engines run only
   * while this server holds the leader lease (src/fleet/leader-lock.ts). Without it the server is alone and
   * always runs them. The bus should be started in replicas mode too (busForServer's `replicas`).
   */
  replica?: ReplicaOptions;
}

export interface RunningServer {
  url: string;
  host: string;
  port: number;
  dataDir: string;
  store: Store;
  metrics: MetricsRegistry;
  /** Whether OCELLUS_ADMIN_TOKEN (adminToken) was stored on this start, or why not. */
  adminSeed: AdminSeed;
  /** The bus's description (e.g. broker URL), or null without a bus. */
  bus: string | null;
  /** Whether this server runs the fleet's engines now (always, unless it is one of several replicas). */
  leading(): boolean;
  /** Stops the bus, the HTTP server (open connections included) and the database, in that order. */
  close(): Promise<void>;
}

function listen(server: ServerType): Promise<AddressInfo> {
  return new Promise((resolve, reject) => {
    const onError = (e: Error) => reject(e);
    server.once('error', onError);
    server.once('listening', () => {
      server.off('error', onError);
      resolve(server.address() as AddressInfo);
    });
  });
}

/** Composes the store, blob store, signing key, bus and HTTP API, and starts listening. */
export async function startServer(options: StartServerOptions): Promise<RunningServer> {
  const log = options.log ?? (() => {});
  const host = options.host ?? '127.0.0.1';
  const store = openStore(options.dataDir, options.databaseUrl !== undefined ? { databaseUrl: options.databaseUrl } : {});
  let bus: BusAttachment | null = null;
  let duties: FleetDuties | null = null;
  const stopEngine = async () => {
    await duties?.stop();
  };
  try {
    const blobs = createBlobStore(options.dataDir);
    // The chain first: it finishes a key rotation a crash interrupted before the key is read.
    const keyChain = loadKeyChain(options.dataDir);
    const key = loadOrCreateSigningKey(options.dataDir, generateSigningKeyPair);
    const signer = createSigner(key, keyChain);
    const metrics = createMetricsRegistry();
    const loginGuard = createLoginGuard(options.clock ? { clock: options.clock } : {});
    const adminSeed = seedAdminToken(store, options.adminToken, (options.clock?.now() ?? new Date()).toISOString());

    // The bus starts here, before HTTP, so the first assignment already has a publisher.
    if (options.bus) bus = await options.bus({ store, metrics, log, loginGuard });

    const changes = createChangeFeed();
    const relay = bus?.relay;
    // Changes made here go to this server's listeners and, with replicas, to the others'; theirs come back to ours.
    const feed = relay ? relayedFeed(changes, relay) : changes;
    bus?.onDevicesStored?.((deviceIds) => feed.publish({ kind: 'devices', deviceIds }));
    const remoteDevices = new Set<(deviceIds: string[]) => void>();
    relay?.onRemote((raw, from) => {
      const parsed = fleetChangeSchema.safeParse(raw);
      if (!parsed.success) return log(`relay: dropped a change from replica ${from} that is not a fleet change`);
      const change = parsed.data as FleetChange;
      changes.publish(change);
      // Another replica stored these devices' reports: the rollout engine judges them as if stored here.
      if (change.kind === 'devices') for (const listener of remoteDevices) listener(change.deviceIds);
    });
    const app = createApp({
      store,
      changes: feed,
      ...(options.consoleDir !== undefined ? { consoleDir: options.consoleDir } : {}),
      blobs,
      signer,
      metrics,
      ...(options.clock ? { clock: options.clock } : {}),
      ...(bus ? { publisher: bus.publisher } : {}),
      loginGuard,
      ...(bus?.disconnectDevice ? { sessions: { disconnect: bus.disconnectDevice.bind(bus) } } : {}),
      ...(options.maxWeightsBytes !== undefined ? { limits: { maxWeightsBytes: options.maxWeightsBytes } } : {}),
    });
    // Rollouts carry on from the database: one left running by an earlier process continues here. Devices'
    // reports wake the engine, so a gate is judged as soon as its facts are stored.
    const localReports = bus?.onDevicesStored?.bind(bus);
    const reports = localReports
      ? (listener: (deviceIds: string[]) => void) => {
          const stopLocal = localReports(listener);
          remoteDevices.add(listener);
          return () => (stopLocal(), remoteDevices.delete(listener), undefined);
        }
      : undefined;
    const clock = options.clock ?? { now: () => new Date() };
    const { calibrationEveryMs, driftTolerance, ...rolloutTiming } = options.fleet ?? {};
    const lock = options.replica
      ? createLeaseLock({
          leases: store.leaderLeases,
          name: 'fleet-engines',
          holder: options.replica.replicaId,
          clock,
          log,
          ...(options.replica.leaderPollMs !== undefined ? { pollMs: options.replica.leaderPollMs } : {}),
        })
      : createSoleLock();
    const fence = () => lock.held();
    duties = startFleetDuties({
      lock,
      log,
      makeEngines: () => {
        // Drift episodes and the gate's class calibrations, refreshed on their own timer.
        const calibration = createCalibrationEngine({
          store,
          clock,
          log,
          fence,
          ...(calibrationEveryMs !== undefined ? { calibrationEveryMs } : {}),
          ...(driftTolerance !== undefined ? { driftTolerance } : {}),
        });
        const engine = createRolloutEngine({
          store,
          publisher: bus?.publisher,
          clock,
          calibration,
          log,
          fence,
          ...(reports ? { onDevicesStored: reports } : {}),
          ...rolloutTiming,
        });
        // The freshness statements: signed with the release key, re-signed on their period while the bus runs;
        // one replica at a time signs them, like the engines.
        const freshness = bus?.freshness
          ? createFreshnessService({ releases: store.releases, signer, publisher: bus.freshness, clock, log, ...options.freshness })
          : null;
        return {
          start: () => (calibration.start(), engine.start(), freshness?.start()),
          stop: async () => {
            calibration.stop();
            await freshness?.stop();
            await engine.stop();
          },
        };
      },
    });
    const server = serve({
      fetch: app.fetch,
      port: options.port ?? 8080,
      hostname: host,
      ...(options.tls ? { createServer: createHttpsServer, serverOptions: { cert: options.tls.certPem, key: options.tls.keyPem, minVersion: 'TLSv1.2' as const } } : {}),
    });
    const address = await listen(server);
    const urlHost = address.family === 'IPv6' ? `[${address.address}]` : address.address;
    const url = `${options.tls ? 'https' : 'http'}://${urlHost}:${address.port}`;
    log(`ocellus: serving ${url} (data ${options.dataDir}, signing key ${signer.keyId})`);
    if (bus?.description) log(`ocellus: bus ${bus.description}`);

    let closing: Promise<void> | null = null;
    const attached = bus;
    return {
      url,
      host: address.address,
      port: address.port,
      dataDir: options.dataDir,
      store,
      metrics,
      adminSeed,
      bus: attached?.description ?? null,
      leading: () => duties?.leading() ?? false,
      close: function close() {
        closing ??= (async () => {
          await stopEngine();
          await attached?.close();
          await new Promise<void>((resolve) => {
            server.close(() => resolve());
            // Keep-alive connections would hold close() open; end them.
            if ('closeAllConnections' in server) server.closeAllConnections();
          });
          store.close();
        })();
        return closing;
      },
    };
  } catch (e) {
    await stopEngine().catch(() => undefined);
    await bus?.close().catch(() => undefined);
    store.close();
    throw e;
  }
}

/** A feed whose changes also go to the other replicas (what comes from them is published on the inner feed only). */
function relayedFeed(inner: ReturnType<typeof createChangeFeed>, relay: NonNullable<BusAttachment['relay']>): ReturnType<typeof createChangeFeed> {
  return {
    publish: function publishEverywhere(change: FleetChange) {
      inner.publish(change);
      relay.send(change);
    },
    subscribe: (listener) => inner.subscribe(listener),
    listenerCount: () => inner.listenerCount(),
  };
}
