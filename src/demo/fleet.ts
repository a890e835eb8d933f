import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { createAgent, type Agent } from '../../device-agent/agent.js';
import { agentSettingsSchema } from '../../device-agent/config.js';
import { createSimDriver, type SimDriver } from '../../device-agent/sim-driver.js';
import { systemClock } from '../../device-agent/clock.js';
import { ApiError, type ApiClient } from '../api-client/api-client.js';
import { DEMO_CLASSES, type DemoClass } from './scenario.js';

export interface DemoRobotSpec {
  deviceId: string;
  demoClass: DemoClass;
  /** Index among all robots, from 0. */
  index: number;
  /** The simulated unit's hidden efficiency (measured inference time = predicted × efficiency). */
  efficiency: number;
}

export interface EnrolledRobot extends DemoRobotSpec {
  agent: Agent;
  driver: SimDriver;
  dataDir: string;
}

/** Robots spread over the two classes in turn: gh-a-01, gh-b-01, gh-a-02, ... */
export function planRobots(count: number): DemoRobotSpec[] {
  return Array.from({ length: count }, (_, index) => {
    const demoClass = DEMO_CLASSES[index % DEMO_CLASSES.length]!;
    const n = Math.floor(index / DEMO_CLASSES.length) + 1;
    // Units differ by a few percent, as real ones do; fixed per robot so runs repeat.
    const efficiency = Math.round((0.94 + ((index * 37) % 13) / 100) * 1000) / 1000;
    return { deviceId: `${demoClass.robotPrefix}-${String(n).padStart(2, '0')}`, demoClass, index, efficiency };
  });
}

/**
 * Enrols one robot through the API (its MQTT password is kept in its own folder, so a later demo run on the
 * same data folder reuses it). Returns the password.
 */
async function enrol(api: ApiClient, spec: DemoRobotSpec, dataDir: string): Promise<string> {
  const credentialsFile = join(dataDir, 'credentials.json');
  try {
    const r = await api.json<{ mqtt: { password: string } }>('POST', '/api/v1/devices', {
      id: spec.deviceId,
      deviceClassId: spec.demoClass.deviceClassId,
      tags: ['demo', `class-${spec.demoClass.robotPrefix}`],
    });
    writeFileSync(credentialsFile, JSON.stringify({ deviceId: spec.deviceId, password: r.mqtt.password, demoData: true }), { mode: 0o600 });
    return r.mqtt.password;
  } catch (e) {
    if (e instanceof ApiError && e.status === 409 && existsSync(credentialsFile)) {
      return (JSON.parse(readFileSync(credentialsFile, 'utf8')) as { password: string }).password;
    }
    throw e;
  }
}

export interface FleetOptions {
  api: ApiClient;
  robots: readonly DemoRobotSpec[];
  /** Folder under which each robot gets its own agent folder. */
  robotsDir: string;
  brokerUrl: string;
  serverUrl: string;
  publicKeyPem: string;
  /** Seconds between telemetry readings. */
  telemetryIntervalS: number;
  log: (deviceId: string, line: string) => void;
}

/** Enrols every robot and builds its agent (in this process, over real MQTT) with a simulated driver. */
export async function enrolFleet(options: FleetOptions): Promise<EnrolledRobot[]> {
  mkdirSync(options.robotsDir, { recursive: true });
  const keyPath = join(options.robotsDir, 'server-public-key.pem');
  writeFileSync(keyPath, options.publicKeyPem);
  const out: EnrolledRobot[] = [];
  for (const spec of options.robots) {
    const dataDir = join(options.robotsDir, spec.deviceId);
    mkdirSync(dataDir, { recursive: true });
    const password = await enrol(options.api, spec, dataDir);
    const { publicKeyPath: _unused, password: _given, passwordFile: _none, ...settings } = agentSettingsSchema.parse({
      deviceId: spec.deviceId,
      deviceClassId: spec.demoClass.deviceClassId,
      brokerUrl: options.brokerUrl,
      password,
      serverUrl: options.serverUrl,
      publicKeyPath: keyPath,
      dataDir,
      controlPort: 0,
      telemetryIntervalS: options.telemetryIntervalS,
      simEfficiency: spec.efficiency,
      simSeed: spec.index + 1,
    });
    const driver = createSimDriver({ clock: systemClock, timeScale: settings.simTimeScale, efficiency: spec.efficiency, seed: settings.simSeed });
    const agent = createAgent({ config: { ...settings, password, publicKeyPem: options.publicKeyPem }, driver, log: (line) => options.log(spec.deviceId, line) });
    out.push({ ...spec, agent, driver, dataDir });
  }
  return out;
}
