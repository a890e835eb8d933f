/**
 * A rig for agent tests: a real SQLite store, a real MQTT broker (embedded, or an external one),
 * the bus bridge, a real HTTP server for weights (Range requests, Basic auth), and agents built
 * with the real simulated driver on temporary folders.
 */
import { createServer, type IncomingMessage, type Server } from 'node:http';
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import { createBridge, type Bridge } from '../../src/bus/bridge.js';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/bus/broker.js';
import { openStore, type Store } from '../../src/store/index.js';
import { createAgent, type Agent } from '../../device-agent/agent.js';
import { agentSettingsSchema, type AgentConfig } from '../../device-agent/config.js';
import { createSimDriver, type SimDriver } from '../../device-agent/sim-driver.js';
import { systemClock } from '../../device-agent/clock.js';
import { demoDeviceClass, keys, tempDir } from './agent-fixtures.js';

export interface WeightsServer {
  url: string;
  /** Bytes served per path; tests may replace them (to serve wrong bytes). */
  files: Map<string, Buffer>;
  /** Bytes served for `?sha256=<hash>` whatever the path, as the server serves any stored version of a model by hash. */
  bySha: Map<string, Buffer>;
  /** Every request: path and Range header. */
  requests: Array<{ path: string; range: string | undefined; user: string; sha256: string | null }>;
  /** When set, a full download of this path is cut off after this many bytes (once). */
  cutOnce: Map<string, number>;
  close(): Promise<void>;
}

function basicUser(req: IncomingMessage): string {
  const h = req.headers.authorization ?? '';
  return h.startsWith('Basic ') ? Buffer.from(h.slice(6), 'base64').toString('utf8').split(':')[0]! : '';
}

/** A small real HTTP server with RFC 9110 byte ranges, standing in for the weights route. */
export async function startWeightsServer(): Promise<WeightsServer> {
  const files = new Map<string, Buffer>();
  const bySha = new Map<string, Buffer>();
  const requests: WeightsServer['requests'] = [];
  const cutOnce = new Map<string, number>();
  const server: Server = createServer((req, res) => {
    const url = new URL(req.url ?? '/', 'http://x');
    const path = url.pathname;
    const sha256 = url.searchParams.get('sha256');
    requests.push({ path, range: req.headers.range, user: basicUser(req), sha256 });
    const body = (sha256 !== null ? bySha.get(sha256) : undefined) ?? files.get(path);
    if (!basicUser(req)) return void res.writeHead(401).end();
    if (!body) return void res.writeHead(404).end();
    const m = /^bytes=(\d+)-$/.exec(req.headers.range ?? '');
    if (m) {
      const start = Number(m[1]);
      if (start >= body.length) return void res.writeHead(416, { 'content-range': `bytes */${body.length}` }).end();
      res.writeHead(206, { 'content-range': `bytes ${start}-${body.length - 1}/${body.length}`, 'content-length': body.length - start });
      return void res.end(body.subarray(start));
    }
    const cut = cutOnce.get(path);
    res.writeHead(200, { 'content-length': body.length });
    if (cut !== undefined) {
      cutOnce.delete(path);
      res.write(body.subarray(0, cut), () => res.destroy());
      return;
    }
    res.end(body);
  });
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
  const port = (server.address() as { port: number }).port;
  return {
    url: `http://127.0.0.1:${port}`, files, bySha, requests, cutOnce,
    close: () => new Promise<void>((r) => { server.closeAllConnections(); server.close(() => r()); }),
  };
}

export interface BusRig {
  store: Store;
  bridge: Bridge;
  brokerUrl: string;
  broker: EmbeddedBroker | null;
  serverClient: MqttClient;
  enrol(deviceId: string): string;
  /** Embedded only: stop the broker and start it again on the same port. */
  restartBroker(): Promise<void>;
  stopBroker(): Promise<void>;
  startBroker(): Promise<void>;
  close(): Promise<void>;
}

const SERVER_USER = { username: 'test-server', password: 'test-server-secret' };

/** Store + broker + bridge. With `externalUrl` the broker is an already running one (Mosquitto). */
export async function startBusRig(externalUrl?: string): Promise<BusRig> {
  const dir = tempDir('agent-bus');
  const store = openStore(dir.path);
  const passwords = new Map<string, string>();
  let broker: EmbeddedBroker | null = null;
  let port = 0;
  const startBroker = async () => {
    broker = await startEmbeddedBroker({ port, serverUser: SERVER_USER, authenticate: (id, pw) => store.verifyDeviceCredentials(id, pw) });
    port = broker.port;
  };
  if (!externalUrl) await startBroker();
  const brokerUrl = externalUrl ?? broker!.url;
  const serverClient = await mqtt.connectAsync(brokerUrl, { ...SERVER_USER, reconnectPeriod: 200, clean: true });
  const bridge = createBridge({ mqttClient: serverClient, store, clock: { now: () => new Date() } });
  return {
    store, bridge, brokerUrl, serverClient,
    get broker() { return broker; },
    enrol(deviceId) {
      if (!passwords.has(deviceId)) {
        const r = store.devices.enrol({ id: deviceId, deviceClassId: demoDeviceClass.id, tags: [], actor: 'test', at: new Date().toISOString() });
        passwords.set(deviceId, r!.password);
      }
      return passwords.get(deviceId)!;
    },
    stopBroker: async () => { await broker?.close(); },
    startBroker,
    restartBroker: async () => { await broker?.close(); await startBroker(); },
    async close() {
      await bridge.close();
      await serverClient.endAsync(true);
      await broker?.close();
      store.close();
      dir.remove();
    },
  } as BusRig;
}

export interface AgentRig {
  agent: Agent;
  driver: SimDriver;
  config: AgentConfig;
  dataDir: string;
  logs: string[];
}

/** Every setting's default, as the agent's schema gives it. */
function settingDefaults(): Omit<AgentConfig, 'publicKeyPem'> {
  const { publicKeyPath: _unused, passwordFile: _none, ...defaults } = agentSettingsSchema.parse({
    deviceId: 'x', deviceClassId: 'x', brokerUrl: 'mqtt://x', password: 'x', serverUrl: 'http://x', publicKeyPath: 'x', dataDir: 'x',
  });
  return { ...defaults, password: 'x' };
}

export function agentConfig(deviceId: string, password: string, brokerUrl: string, serverUrl: string, dataDir: string, extra: Partial<AgentConfig> = {}): AgentConfig {
  return {
    ...settingDefaults(),
    deviceId, deviceClassId: demoDeviceClass.id, brokerUrl, password, serverUrl, publicKeyPem: keys.publicKeyPem, dataDir,
    driver: 'sim', controlHost: '127.0.0.1', controlPort: 0, telemetryIntervalS: 3600, ackTimeoutMs: 500,
    cacheMaxBytes: 64 * 1024 * 1024, reconnectMs: 200, keepaliveS: 30, simTimeScale: 0, simEfficiency: 1, simSeed: 7, ...extra,
  };
}

/** An in-process agent with the simulated driver at time scale 0. */
export async function startAgent(config: AgentConfig, failure?: { step: 'setMemoryPartition' | 'loadWeights' | 'applyCamera'; task?: string }): Promise<AgentRig> {
  const driver = createSimDriver({ clock: systemClock, timeScale: 0, seed: 7, ...(failure ? { failStep: failure.step } : {}), ...(failure?.task ? { failTask: failure.task } : {}) });
  const logs: string[] = [];
  const agent = createAgent({ config, driver, log: (l) => logs.push(l) });
  await agent.start();
  return { agent, driver, config, dataDir: config.dataDir, logs };
}

/** Writes the agent's config and key files for a process run. */
export function writeProcessConfig(dir: string, config: AgentConfig): string {
  const keyPath = join(dir, 'server-public.pem');
  writeFileSync(keyPath, config.publicKeyPem);
  const { publicKeyPem: _unused, ...rest } = config;
  const path = join(dir, 'agent.json');
  writeFileSync(path, JSON.stringify({ ...rest, publicKeyPath: keyPath }, null, 2));
  return path;
}
