/**
 * The set-up the agent tests share: a bus rig (real SQLite, the embedded broker, the bridge), a weights server
 * with two demo models' weights, and agents started in-process, all torn down after the file, newest first.
 * Demo data: greenhouse row and leaf models; `labels` keep one file's weights apart from another's.
 */
import { afterAll, beforeAll } from 'vitest';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';
import type { AgentConfig } from '../../device-agent/config.js';
import { demoTask, demoWeights, tempDir, uniqueDeviceId, waitFor } from './agent-fixtures.js';
import { agentConfig, startAgent, startBusRig, startWeightsServer, type AgentRig, type BusRig, type WeightsServer } from './agent-rig.js';

/** Which step of the simulated driver fails (and for which task). */
export type AgentFailure = Parameters<typeof startAgent>[1];

export interface AgentSuite {
  rows: ReturnType<typeof demoWeights>;
  leaves: ReturnType<typeof demoWeights>;
  /** The two demo tasks (rows, leaves) a release built for these tests carries. */
  tasks: { rows: ReturnType<typeof demoTask>; leaves: ReturnType<typeof demoTask> };
  readonly bus: BusRig;
  readonly web: WeightsServer;
  /** Runs `fn` after the file's tests, before the weights server and the bus close. */
  onCleanup(fn: () => unknown): void;
  /** A temporary folder removed after the file's tests. */
  dir(label: string): { path: string; remove(): void };
  /** Starts an in-process agent on `config`; it is stopped after the file's tests (if a test has not already). */
  startAgent(config: AgentConfig, failure?: AgentFailure): Promise<AgentRig>;
  /** An enrolled, connected in-process agent (simulated driver, `failure` making one of its steps fail). */
  newAgent(label: string, options?: { dataDir?: string; failure?: AgentFailure; extra?: Partial<AgentConfig> }): Promise<{ id: string; rig: AgentRig }>;
  /** The device's stored events, oldest first, parsed (of one type when given). */
  storedEvents(id: string, type?: string): any[];
  storedTypes(id: string): string[];
}

export function agentSuite(labels: { rows: string; leaves: string }): AgentSuite {
  const rows = demoWeights(labels.rows);
  const leaves = demoWeights(labels.leaves);
  const tasks = { rows: demoTask('rows-net', rows, 0.5, 4), leaves: demoTask('leaf-net', leaves, 0.25, 2.8) };
  let bus: BusRig | null = null;
  let web: WeightsServer | null = null;
  const cleanups: Array<() => unknown> = [];

  beforeAll(async () => {
    bus = await startBusRig();
    web = await startWeightsServer();
    web.files.set('/api/v1/models/rows-net/weights', rows.bytes);
    web.files.set('/api/v1/models/leaf-net/weights', leaves.bytes);
  });
  afterAll(async () => {
    for (const c of cleanups.reverse()) await c();
    await web?.close();
    await bus?.close();
  });

  const suite: AgentSuite = {
    rows,
    leaves,
    tasks,
    get bus() {
      if (!bus) throw new Error('agent suite: the bus rig starts in beforeAll');
      return bus;
    },
    get web() {
      if (!web) throw new Error('agent suite: the weights server starts in beforeAll');
      return web;
    },
    onCleanup: (fn) => void cleanups.push(fn),
    dir(label) {
      const d = tempDir(label);
      cleanups.push(() => d.remove());
      return d;
    },
    async startAgent(config, failure) {
      const rig = await startAgent(config, failure);
      // Stopping twice is harmless: a test may have stopped it already.
      cleanups.push(() => rig.agent.stop().catch(() => {}));
      return rig;
    },
    async newAgent(label, options = {}) {
      const id = uniqueDeviceId(label);
      const d = suite.dir(label);
      const rig = await suite.startAgent(agentConfig(id, suite.bus.enrol(id), suite.bus.brokerUrl, suite.web.url, options.dataDir ?? d.path, options.extra ?? {}), options.failure);
      await waitFor(() => rig.agent.connected(), 'agent connected');
      return { id, rig };
    },
    storedEvents(id, type) {
      const db = sqliteHandle(suite.bus.store);
      const texts = (
        type === undefined
          ? db.prepare('SELECT event FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all(id)
          : db.prepare('SELECT event FROM device_events WHERE device_id = ? AND type = ? ORDER BY seq').pluck().all(id, type)
      ) as string[];
      return texts.map((e) => JSON.parse(e));
    },
    storedTypes: (id) => sqliteHandle(suite.bus.store).prepare('SELECT type FROM device_events WHERE device_id = ? ORDER BY seq').pluck().all(id) as string[],
  };
  return suite;
}
