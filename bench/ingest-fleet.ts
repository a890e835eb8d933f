// Child process of the ingest bench: many device agents in one process, each with a backlog of events on
// disk (as after a network outage), draining it through the broker to the server. Reads its settings from
// the JSON file named by argv[2]; talks to the parent in JSON lines on stdout, waits for "go" on stdin.
import { mkdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { createInterface } from 'node:readline';
import { createAgent, type Agent } from '../device-agent/agent.js';
import { agentSettingsSchema } from '../device-agent/config.js';
import { systemClock } from '../device-agent/clock.js';
import { openEventLog } from '../device-agent/event-log.js';
import { createSimDriver } from '../device-agent/sim-driver.js';

export interface IngestFleetSettings {
  brokerUrl: string;
  serverUrl: string;
  publicKeyPath: string;
  dataRoot: string;
  deviceClassId: string;
  eventsPerDevice: number;
  devices: Array<{ id: string; password: string }>;
}

const say = (message: Record<string, unknown>) => process.stdout.write(`${JSON.stringify(message)}\n`);

/** Demo data: a telemetry reading of fruit counting on a greenhouse scout. */
function telemetry(i: number) {
  return {
    type: 'telemetry' as const,
    task: 'fruit-counting',
    profileId: 'fruit-counting-a',
    profileRevision: 1,
    releaseId: 'gh-scout-a-v1',
    frames: 10,
    windowS: 1,
    inferenceMsMean: 0.141 * (1 + ((i % 7) - 3) / 100),
    inferenceMjMean: 0.0345,
    frameEnergyMjMean: 0.096,
  };
}

async function main(): Promise<void> {
  const settings = JSON.parse(readFileSync(process.argv[2]!, 'utf8')) as IngestFleetSettings;
  for (const d of settings.devices) {
    mkdirSync(join(settings.dataRoot, d.id), { recursive: true });
    const log = openEventLog(join(settings.dataRoot, d.id), systemClock);
    for (let i = 0; i < settings.eventsPerDevice; i++) log.append(telemetry(i));
    log.close();
  }
  say({ phase: 'seeded', events: settings.devices.length * settings.eventsPerDevice });
  const lines = createInterface({ input: process.stdin });
  const go = await new Promise<string>((resolve) => lines.once('line', resolve));
  if (go.trim() !== 'go') throw new Error(`expected "go" on stdin, got ${JSON.stringify(go)}`);

  const publicKeyPem = readFileSync(settings.publicKeyPath, 'utf8');
  const agents: Agent[] = settings.devices.map((d, i) => {
    const { publicKeyPath: _unused, password: _given, passwordFile: _none, ...config } = agentSettingsSchema.parse({
      deviceId: d.id,
      deviceClassId: settings.deviceClassId,
      brokerUrl: settings.brokerUrl,
      password: d.password,
      serverUrl: settings.serverUrl,
      publicKeyPath: settings.publicKeyPath,
      dataDir: join(settings.dataRoot, d.id),
      controlPort: 0,
      telemetryIntervalS: 3600,
      // The agents' own ack timeout (2 s by default): their resending adapts to a busy server, so the figure
      // includes whatever duplicates that still costs.
    });
    const driver = createSimDriver({ clock: systemClock, timeScale: 0, seed: i + 1 });
    return createAgent({ config: { ...config, password: d.password, publicKeyPem }, driver, log: (line) => process.stderr.write(`${d.id}: ${line}\n`) });
  });
  await Promise.all(agents.map((a) => a.start()));
  say({ phase: 'started' });
  await new Promise<void>((resolve) => {
    const timer = setInterval(() => {
      if (agents.every((a) => a.connected() && a.unackedEvents() === 0)) {
        clearInterval(timer);
        resolve();
      }
    }, 20);
  });
  say({ phase: 'drained', unacked: agents.reduce((sum, a) => sum + a.unackedEvents(), 0) });
  await Promise.all(agents.map((a) => a.stop()));
  say({ phase: 'stopped' });
}

main().then(
  () => process.exit(0),
  (e: unknown) => {
    process.stderr.write(`ingest fleet: ${e instanceof Error ? (e.stack ?? e.message) : String(e)}\n`);
    process.exit(1);
  },
);
