/**
 * A rig for the fleet tests: a real SQLite store in a temporary folder, the embedded MQTT broker, the bus
 * bridge, the real HTTP API in-process, the rollout engine on timers and a clock the test moves, a real HTTP
 * server for weights, and in-process agents built with the agent's factory and the simulated driver (demo
 * data throughout).
 */
import mqtt, { type MqttClient } from 'mqtt';
import { createApp, createSigner } from '../../src/api/index.js';
import { createBridge, type Bridge } from '../../src/bus/bridge.js';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../src/bus/broker.js';
import { createKeepaliveNotes } from '../../src/bus/connection-notes.js';
import { createCalibrationEngine, type CalibrationEngine, type CalibrationEngineOptions } from '../../src/fleet/calibration/engine.js';
import { createRolloutEngine, type RolloutEngine, type RolloutEngineOptions } from '../../src/fleet/rollout/engine.js';
import type { SignedRelease } from '../../src/protocol/release.js';
import { createBlobStore, openStore, type Store } from '../../src/store/index.js';
import { createAgent, type Agent } from '../../device-agent/agent.js';
import { createManualScheduler, type ManualScheduler } from './manual-scheduler.js';
import type { AgentConfig } from '../../device-agent/config.js';
import { createSimDriver, type SimDriver } from '../../device-agent/sim-driver.js';
import { systemClock } from '../../device-agent/clock.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, keys, sign, tempDir, waitFor } from './agent-fixtures.js';
import { agentConfig, startWeightsServer, type WeightsServer } from './agent-rig.js';

/** Demo data: two tasks of a greenhouse row camera, with the weights the weights server hands out. */
export const rowsWeights = demoWeights('fleet rows-net');
export const leavesWeights = demoWeights('fleet leaf-net');
export const demoTasks = { rows: demoTask('rows-net', rowsWeights, 0.5, 4), leaves: demoTask('leaf-net', leavesWeights, 0.25, 2.8) };

export interface FleetAgent {
  id: string;
  agent: Agent;
  driver: SimDriver;
  config: AgentConfig;
}

export interface FleetRig {
  store: Store;
  bridge: Bridge;
  broker: EmbeddedBroker;
  /** Started, and listening for reports, but its timers run only when the test advances `engineTime`. */
  engine: RolloutEngine;
  engineTime: ManualScheduler;
  /** The engine's clock: real time plus what `advanceEngineClock` added (apply and offline timeouts count on it). */
  engineClock: { now(): Date };
  advanceEngineClock(ms: number): void;
  /**
   * Runs engine passes until the rollout's view satisfies `done` (then returns it), with the agents' real MQTT
   * traffic in between; fails after `timeoutMs`.
   */
  driveRollout(id: string, done: (rollout: any) => boolean, message: string, timeoutMs?: number): Promise<any>;
  /** Drift and class calibrations on their own timer (`calibrationEveryMs`); tests may call refresh() themselves. */
  calibration: CalibrationEngine;
  web: WeightsServer;
  operatorToken: string;
  /** JSON request to the in-process API as the operator. */
  call(method: string, path: string, body?: unknown): Promise<{ status: number; body: any }>;
  /** Stores a release signed with the test key (demo data). */
  storeRelease(id: string, version: number): SignedRelease;
  enrol(deviceId: string, tags?: string[]): string;
  /**
   * Starts an in-process agent; `publicKeyPem` overrides the key it trusts. `simSpeedup` runs the simulated
   * driver's clock that many times faster, so a short real telemetry interval covers many simulated frames.
   */
  startAgent(deviceId: string, extra?: Partial<AgentConfig>, simSpeedup?: number): Promise<FleetAgent>;
  close(): Promise<void>;
}

const SERVER_USER = { username: 'fleet-test-server', password: 'fleet-test-server-secret' };

export async function startFleetRig(options: RolloutEngineOptions & CalibrationEngineOptions = {}): Promise<FleetRig> {
  const { calibrationEveryMs, driftTolerance, ...engineOptions } = options;
  const dir = tempDir('fleet');
  const store = openStore(dir.path);
  const passwords = new Map<string, string>();
  const agentDirs: Array<{ remove(): void }> = [];
  const agents = new Set<FleetAgent>();
  // Wired as startBus wires them: the broker's keep-alive drops reach the bridge.
  const keepaliveNotes = createKeepaliveNotes();
  const broker = await startEmbeddedBroker({ port: 0, serverUser: SERVER_USER, authenticate: (id, pw) => store.verifyDeviceCredentials(id, pw), onKeepaliveMissed: keepaliveNotes.noteMissed });
  const client: MqttClient = await mqtt.connectAsync(broker.url, { ...SERVER_USER, reconnectPeriod: 200, clean: true });
  const bridge = createBridge({ mqttClient: client, store, clock: { now: () => new Date() }, keepaliveNotes });
  const web = await startWeightsServer();
  web.files.set('/api/v1/models/rows-net/weights', rowsWeights.bytes);
  web.files.set('/api/v1/models/leaf-net/weights', leavesWeights.bytes);
  // Wired as the server wires it: devices' reports wake the engine.
  const calibration = createCalibrationEngine({
    store, clock: { now: () => new Date() }, ...(calibrationEveryMs !== undefined ? { calibrationEveryMs } : {}), ...(driftTolerance !== undefined ? { driftTolerance } : {}),
  });
  const engineTime = createManualScheduler();
  let engineClockOffsetMs = 0;
  const engineClock = { now: () => new Date(Date.now() + engineClockOffsetMs) };
  const engine = createRolloutEngine({
    store, publisher: bridge, clock: engineClock, calibration, onDevicesStored: (listener) => bridge.onStored(listener), scheduler: engineTime, ...engineOptions,
  });
  calibration.start();
  engine.start();
  // The agents' trusted key signs here too (re-issues of a rollback), and the blob store holds the weights a re-issue checks.
  const blobs = createBlobStore(dir.path);
  for (const w of [rowsWeights, leavesWeights]) {
    const put = await blobs.put((async function* () { yield w.bytes; })(), { sha256: w.sha256, sizeBytes: w.bytes.length, maxBytes: w.bytes.length });
    if (!put.ok) throw new Error(`fleet rig: storing demo weights failed: ${put.detail}`);
  }
  const app = createApp({ store, blobs, signer: createSigner(keys), publisher: bridge, onError: (e) => { throw e; } });
  const operatorToken = store.tokens.create({ role: 'operator', label: 'fleet test operator', actor: 'test set-up', at: new Date().toISOString() }).secret;

  async function call(method: string, path: string, body?: unknown): Promise<{ status: number; body: any }> {
    const res = await app.request(path, {
      method,
      headers: { authorization: `Bearer ${operatorToken}`, ...(body === undefined ? {} : { 'content-type': 'application/json' }) },
      ...(body === undefined ? {} : { body: JSON.stringify(body) }),
    });
    const text = await res.text();
    return { status: res.status, body: text && res.headers.get('content-type')?.includes('json') ? JSON.parse(text) : text };
  }

  function enrol(deviceId: string, tags: string[] = []): string {
    if (!passwords.has(deviceId)) {
      const r = store.devices.enrol({ id: deviceId, deviceClassId: demoDeviceClass.id, tags, actor: 'test', at: new Date().toISOString() });
      passwords.set(deviceId, r!.password);
    }
    return passwords.get(deviceId)!;
  }

  return {
    store,
    bridge,
    broker,
    engine,
    calibration,
    web,
    operatorToken,
    engineTime,
    engineClock,
    advanceEngineClock(ms) {
      engineClockOffsetMs += ms;
    },
    call,
    async driveRollout(id, done, message, timeoutMs = 60_000) {
      return waitFor(async () => {
        await engine.tick();
        const view = (await call('GET', `/api/v1/rollouts/${id}`)).body;
        return done(view) ? view : null;
      }, message, timeoutMs);
    },
    storeRelease(id, version) {
      const signed = sign(demoRelease(id, version, demoTasks));
      store.releases.insert({ id, deviceClassId: demoDeviceClass.id, version, createdAt: new Date().toISOString(), createdBy: 'test (demo data)', signed });
      return signed;
    },
    enrol,
    async startAgent(deviceId, extra = {}, simSpeedup = 1) {
      const d = tempDir(`agent-${deviceId}`);
      agentDirs.push(d);
      const config = agentConfig(deviceId, enrol(deviceId), broker.url, web.url, extra.dataDir ?? d.path, { telemetryIntervalS: 0.2, ...extra });
      const simClock = { now: () => systemClock.now(), monotonicMs: () => systemClock.monotonicMs() * simSpeedup };
      const driver = createSimDriver({ clock: simClock, timeScale: 0, seed: config.simSeed, efficiency: config.simEfficiency });
      const agent = createAgent({ config, driver });
      await agent.start();
      const a = { id: deviceId, agent, driver, config };
      agents.add(a);
      const stop = agent.stop.bind(agent);
      agent.stop = async () => {
        agents.delete(a);
        await stop();
      };
      return a;
    },
    async close() {
      calibration.stop();
      await engine.stop();
      for (const a of [...agents]) await a.agent.stop();
      await bridge.close();
      await client.endAsync(true);
      await broker.close();
      await web.close();
      store.close();
      for (const d of agentDirs) d.remove();
      dir.remove();
    },
  };
}
