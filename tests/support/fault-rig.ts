/**
 * A rig for the fault tests: the server as a real process (`ocellus serve` with its embedded broker) on
 * fixed loopback ports so it can be killed and started again on the same data folder, the greenhouse demo
 * scenario (demo data) loaded through its API, and device agents as real processes.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { createApiClient, type ApiClient } from '../../src/api-client/api-client.js';
import { createClassRelease, loadScenario } from '../../src/demo/load-scenario.js';
import { DEMO_CATALOG_DIR, DEMO_CLASSES } from '../../src/demo/scenario.js';
import { waitFor } from './agent-fixtures.js';
import { spawnAgent, spawnTsProcess, type AgentProcess } from './agent-process-rig.js';

export const ROOT = new URL('../..', import.meta.url).pathname;
export const ADMIN_TOKEN = 'fault-test-admin-token-demo-data-0001';
export const CLASS_A = DEMO_CLASSES[0]!;

/** A free loopback port, picked by the system and released again for the process that will listen on it. */
export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const address = s.address();
      const port = typeof address === 'object' && address ? address.port : 0;
      s.close(() => resolve(port));
    });
  });
}

export interface ServerProcess {
  url: string;
  child: ChildProcess;
  output: string[];
  /** SIGKILL: the process dies at once, mid-transaction or not. */
  kill(): Promise<void>;
  /** SIGTERM: a clean stop; resolves with the exit code. */
  stop(): Promise<number | null>;
}

/** Starts the fault tests' agent host (tests/support/fault-agent-host.ts) as a process, its hardware kept in `hardwareFile`. */
export function startAgentHost(args: string[], hardwareFile: string): AgentProcess {
  return spawnTsProcess('tests/support/fault-agent-host.ts', args, 'agent host', { ...process.env, FAULT_HARDWARE_FILE: hardwareFile });
}

/** Starts `ocellus serve` as a process (with `extraArgs`, e.g. --broker and --replicas) and waits until it prints its URL. */
export async function startServerProcess(dataDir: string, port: number, mqttPort: number, extraArgs: readonly string[] = []): Promise<ServerProcess> {
  const child = spawn(process.execPath, ['--import', 'tsx', 'src/cli/main.ts', 'serve', '--port', String(port), '--mqtt-port', String(mqttPort), '--data', dataDir, ...extraArgs], {
    cwd: ROOT,
    env: { ...process.env, OCELLUS_ADMIN_TOKEN: ADMIN_TOKEN },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  const output: string[] = [];
  const exited = new Promise<number | null>((resolve) => child.once('exit', (code) => resolve(code)));
  child.stdout!.on('data', (c: Buffer) => output.push(...c.toString('utf8').split('\n').filter(Boolean)));
  child.stderr!.on('data', (c: Buffer) => output.push(...c.toString('utf8').split('\n').filter(Boolean)));
  const url = `http://127.0.0.1:${port}`;
  await waitFor(() => output.includes(url) || child.exitCode !== null, `the server to listen on ${url}`, 45_000);
  if (!output.includes(url)) throw new Error(`the server exited (${child.exitCode}) before listening:\n${output.join('\n')}`);
  return {
    url,
    child,
    output,
    kill: async () => {
      if (child.exitCode === null && child.signalCode === null) child.kill('SIGKILL');
      await exited;
    },
    stop: async () => {
      if (child.exitCode === null && child.signalCode === null) child.kill('SIGTERM');
      return exited;
    },
  };
}

export interface FaultSite {
  dir: string;
  serverDir: string;
  port: number;
  mqttPort: number;
  server: ServerProcess;
  api: ApiClient;
  keyPath: string;
  /** Release id of scout A's first release. */
  releaseA: string;
  agents: AgentProcess[];
  /** Starts the server again on the same data folder and ports. */
  restartServer(): Promise<void>;
  /** Enrols a scout-A robot through the API and returns the agent flags it runs with (its password included). */
  enrolRobot(deviceId: string): Promise<string[]>;
  /** Enrols a scout-A robot through the API and starts its agent process (device-agent/main.ts). */
  startRobot(deviceId: string, extraArgs?: string[]): Promise<AgentProcess>;
  agentDir(deviceId: string): string;
  /** A read-only view of the server's database (WAL lets it read while the server writes). */
  readDb<T>(read: (db: Database.Database) => T): T;
  close(): Promise<void>;
}

/** The server process with the greenhouse scenario loaded and scout A's first release built. */
export async function startFaultSite(label: string): Promise<FaultSite> {
  const dir = mkdtempSync(join(tmpdir(), `ocellus-fault-${label}-`));
  const serverDir = join(dir, 'server');
  const port = await freePort();
  const mqttPort = await freePort();
  let server = await startServerProcess(serverDir, port, mqttPort);
  const api = createApiClient(server.url, ADMIN_TOKEN);
  await loadScenario(api, DEMO_CATALOG_DIR);
  const releaseA = (await createClassRelease(api, CLASS_A)).release.id;
  const { publicKeyPem } = await api.json<{ publicKeyPem: string }>('GET', '/api/v1/signing-key');
  const keyPath = join(dir, 'server-public-key.pem');
  writeFileSync(keyPath, publicKeyPem);
  const agents: AgentProcess[] = [];
  const agentDir = (deviceId: string) => join(dir, 'robots', deviceId);
  async function enrolRobot(deviceId: string): Promise<string[]> {
    const enrolled = await api.json<{ mqtt: { password: string } }>('POST', '/api/v1/devices', { id: deviceId, deviceClassId: CLASS_A.deviceClassId, tags: ['fault-test'] });
    return [
      '--device-id', deviceId, '--device-class-id', CLASS_A.deviceClassId,
      '--broker-url', `mqtt://127.0.0.1:${mqttPort}`, '--password', enrolled.mqtt.password,
      '--server-url', `http://127.0.0.1:${port}`, '--public-key-path', keyPath, '--data-dir', agentDir(deviceId),
      '--control-port', '0', '--reconnect-ms', '200', '--ack-timeout-ms', '1000',
    ];
  }

  return {
    dir, serverDir, port, mqttPort, api, keyPath, releaseA, agents, agentDir,
    get server() {
      return server;
    },
    restartServer: async () => {
      server = await startServerProcess(serverDir, port, mqttPort);
    },
    enrolRobot,
    startRobot: async (deviceId, extraArgs = []) => {
      const agent = spawnAgent([...(await enrolRobot(deviceId)), ...extraArgs]);
      agents.push(agent);
      return agent;
    },
    readDb: (read) => {
      const db = new Database(join(serverDir, 'ocellus.db'), { readonly: true, fileMustExist: true });
      try {
        return read(db);
      } finally {
        db.close();
      }
    },
    close: async () => {
      await Promise.all(agents.map((a) => a.kill()));
      await server.kill();
      rmSync(dir, { recursive: true, force: true });
    },
  };
}
