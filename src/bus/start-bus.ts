import { randomBytes } from 'node:crypto';
import mqtt from 'mqtt';
import type { MetricsRegistry } from '../metrics/registry.js';
import type { Store } from '../store/store.js';
import { createBridge, type Bridge } from './bridge.js';
import type { LoginGuard } from '../store/login-guard.js';
import { startEmbeddedBroker, type BrokerTls, type EmbeddedBroker } from './broker.js';
import { createKeepaliveNotes } from './connection-notes.js';
import type { PacketLimits } from './packet-guard.js';
import { createInlineEventWriter, startWorkerEventWriter } from './event-writer.js';
import { createChangeRelay, replicaLostWill, type ChangeRelay } from './change-relay.js';
import { resyncRetainedStates } from './state-resync.js';
import { SERVER_CHANGES_TOPIC } from '../protocol/topics.js';

export interface BusOptions {
  store: Store;
  /** An external MQTT 3.1.1/5 broker (mqtt://host:port) with the server's account; without it the embedded broker starts. */
  external?: { url: string; username: string; password: string };
  /** Where the embedded broker listens (127.0.0.1:1884 by default; port 0 picks a free one), and the server's account on it (random by default). */
  embedded?: {
    host?: string;
    port?: number;
    serverUser?: { username: string; password: string };
    /** Certificate and key for MQTT over TLS, and optionally a client CA (per-device certificates) and a CRL. */
    tls?: BrokerTls;
    packetLimits?: Partial<PacketLimits>;
  };
  /** Failed-login limits; hand in the one the HTTP API uses, so both count the same failures. */
  loginGuard?: LoginGuard;
  /** CA certificate (PEM) the server's own client trusts when the embedded broker speaks TLS (default: the broker's own certificate, for a self-signed one). */
  serverClientCaPem?: string;
  clock?: { now(): Date };
  /** Where device events are written: a worker thread with its own connection (default), or the event loop's thread. */
  eventWriter?: 'worker' | 'inline';
  /**
   * Several server replicas on one external MQTT 5 broker: device state and events arrive through the shared
   * subscription `group` (each message to one replica), acks are read from the database, and changes are relayed
   * to the other replicas. Needs `external`: the embedded broker is MQTT 3.1.1 only and shares no subscriptions.
   */
  replicas?: { group: string; replicaId: string };
  metrics?: MetricsRegistry;
  log?: (line: string) => void;
}

export interface Bus {
  bridge: Bridge;
  /** The URL devices connect to (the embedded broker's, or the external one). */
  brokerUrl: string;
  /** The embedded broker, when one was started. */
  broker: EmbeddedBroker | null;
  /** The change feed between replicas, in replicas mode. */
  relay: ChangeRelay | null;
  /**
   * Ends a device's live session (after revocation or rotation): 'closed', 'none' when it had no session,
   * or 'external-broker' when the sessions are the external broker's to end.
   */
  disconnectDevice(deviceId: string): Promise<'closed' | 'none' | 'external-broker'>;
  close(): Promise<void>;
}

/**
 * Starts the server's side of the bus: the embedded broker (unless an external one is given), the
 * server's MQTT client and the bridge. The embedded broker keeps retained messages in memory only,
 * so on start the current release of every assigned device is published again.
 */
export async function startBus(options: BusOptions): Promise<Bus> {
  const log = options.log ?? (() => {});
  const clock = options.clock ?? { now: () => new Date() };
  if (options.replicas && !options.external) throw new Error(REPLICAS_NEED_BROKER);
  let broker: EmbeddedBroker | null = null;
  let account: { url: string; username: string; password: string };
  let admitDevices = () => {};
  const devicesAdmitted = new Promise<void>((resolve) => (admitDevices = resolve));
  const keepaliveNotes = createKeepaliveNotes();
  if (options.external) {
    account = options.external;
  } else {
    const serverUser = options.embedded?.serverUser ?? { username: 'ocellus-server', password: randomBytes(24).toString('base64url') };
    broker = await startEmbeddedBroker({
      ...(options.embedded?.host !== undefined ? { host: options.embedded.host } : {}),
      ...(options.embedded?.port !== undefined ? { port: options.embedded.port } : {}),
      ...(options.embedded?.tls ? { tls: options.embedded.tls } : {}),
      ...(options.embedded?.packetLimits ? { packetLimits: options.embedded.packetLimits } : {}),
      ...(options.loginGuard ? { loginGuard: options.loginGuard } : {}),
      ...(options.metrics ? { metrics: options.metrics } : {}),
      serverUser,
      // A keyed hash, microseconds on the event loop; a legacy scrypt hash goes to the thread pool once.
      authenticate: (deviceId, password) => options.store.devices.checkLogin(deviceId, password),
      certificateAllowed: (deviceId) => {
        const device = options.store.devices.get(deviceId);
        if (!device) return { ok: false, reason: 'bad-credentials' };
        return device.revokedAt === null ? { ok: true } : { ok: false, reason: 'revoked' };
      },
      devicesAdmitted,
      onKeepaliveMissed: keepaliveNotes.noteMissed,
      log,
    });
    account = { url: broker.url, ...serverUser };
  }
  const client = await mqtt.connectAsync(account.url, {
    username: account.username,
    password: account.password,
    clientId: `ocellus-server-${randomBytes(6).toString('hex')}`,
    // Over TLS the server's own client trusts the given CA, or else the broker's certificate itself (self-signed).
    ...(options.serverClientCaPem ? { ca: options.serverClientCaPem } : options.embedded?.tls && !options.external ? { ca: options.embedded.tls.certPem } : {}),
    clean: true,
    // Shared subscriptions and No Local are MQTT 5 (MQTT 5.0 §4.8.2, §3.8.3.1).
    ...(options.replicas ? { protocolVersion: 5 as const, clientId: `ocellus-server-${options.replicas.replicaId}-${randomBytes(3).toString('hex')}` } : {}),
    // A replica that dies takes the messages the broker had handed it; its will tells the others to read the states again.
    ...(options.replicas ? { will: { topic: SERVER_CHANGES_TOPIC, payload: Buffer.from(replicaLostWill(options.replicas.replicaId)), qos: 1 as const, retain: false } } : {}),
    reconnectPeriod: 1000,
    connectTimeout: 10_000,
  });
  client.on('error', (e) => log(`bus: ${e.message}`));
  const cursorMode = options.replicas ? 'stored' : 'memory';
  const eventWriter = options.eventWriter === 'inline'
    ? createInlineEventWriter(options.store, cursorMode)
    : await startWorkerEventWriter({ location: options.store.location, cursorMode, log }).catch(async (e: unknown) => {
        await client.endAsync(true);
        await broker?.close();
        throw e;
      });
  const bridge = createBridge({
    mqttClient: client, store: options.store, clock, log, eventWriter, keepaliveNotes,
    ...(options.metrics ? { metrics: options.metrics } : {}),
    ...(options.replicas ? { shareGroup: options.replicas.group } : {}),
  });
  const relay = options.replicas ? createChangeRelay({ client, replicaId: options.replicas.replicaId, log }) : null;
  relay?.onReplicaLost((lost) => {
    log(`bus: replica ${lost} lost its broker connection; reading every device's retained state again`);
    void resyncRetainedStates(client, log);
  });
  await relay?.subscribed();
  // Devices wait at the door until the bridge listens, so the first batch after a restart is not published into nothing.
  await bridge.subscribed();
  admitDevices();
  if (broker) await republishAssignedReleases(options.store, bridge, log);
  return {
    bridge,
    brokerUrl: account.url,
    broker,
    relay,
    disconnectDevice: async function disconnectDevice(deviceId) {
      if (!broker) return 'external-broker';
      return (await broker.disconnect(deviceId)) ? 'closed' : 'none';
    },
    close: async function closeBus() {
      relay?.close();
      await bridge.close();
      await eventWriter.close();
      await client.endAsync();
      await broker?.close();
    },
  };
}

async function republishAssignedReleases(store: Store, bridge: Bridge, log: (line: string) => void): Promise<void> {
  for (const device of store.devices.list()) {
    if (!device.assignedReleaseId) continue;
    let record;
    try {
      record = store.releases.get(device.assignedReleaseId);
    } catch (e) {
      log(`bus: release ${device.assignedReleaseId} of device ${device.id} cannot be republished: ${(e as Error).message}`);
      continue;
    }
    if (!record) {
      log(`bus: release ${device.assignedReleaseId} of device ${device.id} cannot be republished (not stored)`);
      continue;
    }
    // The stored text goes out byte for byte: a re-serialized parsed copy could differ from what was signed.
    await bridge.publishRelease(device.id, record);
  }
}

export const REPLICAS_NEED_BROKER =
  'replicas need an external MQTT 5 broker with shared subscriptions (e.g. Mosquitto 2): the embedded broker speaks MQTT 3.1.1 only and cannot share subscriptions; add --broker mqtt://HOST:PORT';

/** What startServer's `bus` option expects: the bus started on the server's store and metrics. */
export function busForServer(options: Omit<BusOptions, 'store' | 'metrics' | 'log' | 'loginGuard'>) {
  return async function startServerBus(context: { store: Store; metrics: MetricsRegistry; log: (line: string) => void; loginGuard?: LoginGuard }) {
    const bus = await startBus({
      ...options,
      store: context.store,
      metrics: context.metrics,
      log: context.log,
      ...(context.loginGuard ? { loginGuard: context.loginGuard } : {}),
    });
    return {
      publisher: bus.bridge,
      freshness: bus.bridge,
      description: `${bus.broker ? 'embedded MQTT broker' : 'external MQTT broker'} at ${bus.brokerUrl}${options.replicas ? ` (replica ${options.replicas.replicaId} of shared-subscription group ${options.replicas.group})` : ''}`,
      ...(bus.relay ? { relay: bus.relay } : {}),
      onDevicesStored: (listener: (deviceIds: string[]) => void) => bus.bridge.onStored(listener),
      disconnectDevice: (deviceId: string) => bus.disconnectDevice(deviceId),
      close: () => bus.close(),
    };
  };
}
