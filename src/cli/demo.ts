import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { startDemo } from '../demo/run-demo.js';
import { DEMO_CAUTION } from '../demo/scenario.js';
import { clock, formatSummary } from '../demo/summary.js';
import { guard, optionalNumber, parseFlags, UsageError } from './args.js';
import { REPLICAS_NEED_BROKER } from '../bus/start-bus.js';
import { EXIT_BAD_INPUT, EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { sToMs } from '../physics/units.js';

export const usage = `usage: ocellus demo [--robots 12] [--duration S] [--rollout-at S] [--port 8080] [--mqtt-port 1884] [--data DIR]
                   [--database postgres://… ] [--broker mqtt://HOST:PORT [--broker-user U] [--replicas N]]
  Runs the whole system on this machine with demo data: the server with its embedded MQTT broker, the
  greenhouse scenario (profiles/greenhouse-demo) loaded through the API, a release per robot class, and
  simulated robots (device agents over MQTT with simulated cameras) working a time-compressed shift:
  driving along rows, stopping to count fruit, inspecting leaves, and a low-light patrol at the end.
  After the robots have worked a while (demo clock 2:00 by default), a revised fruit-counting profile goes
  out as a staged rollout; the summary line says when. You can start one yourself before that from the
  console: Releases & rollouts, the 'Start a rollout' form.
  Prints the console URL, an admin token and a summary line every few seconds; Ctrl-C stops everything.
  --robots N      simulated robots, spread over the two robot classes (default 12)
  --duration S    stop after S seconds with a final summary (default: run until Ctrl-C)
  --rollout-at S  demo seconds before the staged rollout starts (default 120; with --duration, at most a
                  fifth of it)
  --port, --mqtt-port   HTTP and MQTT ports on 127.0.0.1 (0 picks free ones)
  --data DIR      the demo's folder (server/, robots/<id>/, demo.log); default a new folder under the
                  system's temporary folder, kept after the run so you can look at it
  --database URL  keep the store in PostgreSQL (postgres://…, or OCELLUS_DATABASE_URL) instead of the SQLite
                  file in the demo's folder
  --broker URL    use an external MQTT broker (e.g. Mosquitto on mqtt://127.0.0.1:1883) instead of the
                  embedded one; the server logs in as --broker-user (ocellus-server) with the password in
                  OCELLUS_BROKER_PASSWORD
  --replicas N    run N server replicas in this process on the same store and broker (needs --broker, an
                  MQTT 5 broker with shared subscriptions); see docs/scale-out.md
  Environment: OCELLUS_ADMIN_TOKEN (24+ characters) is stored as the admin token on the first start.
`;

const SUMMARY_EVERY_MS = 3000;
/** Late enough that a newcomer has signed in to the console and seen the robots work before the rollout runs. */
const DEFAULT_ROLLOUT_AT_S = 120;

/**
 * Resolves `requested` when Ctrl-C (SIGINT) or SIGTERM arrives, or once `stopAfter` has run out. The handlers stay until `release()`:
 * a signal during shutdown (a terminal sends Ctrl-C to every process of the group, and launchers relay it
 * again) must not kill the process halfway through stopping agents, server and broker.
 */
function stopRequest(io: CliIo) {
  let stopping = false;
  let repeats = 0;
  let resolveStop: (why: string) => void = () => {};
  const requested = new Promise<string>((resolvePromise) => (resolveStop = resolvePromise));
  const onSignal = (signal: string) => {
    // One Ctrl-C reaches the demo twice (from the terminal and relayed by its launcher): only a second
    // press, a third signal, is worth an answer.
    if (stopping) {
      repeats += 1;
      if (repeats === 2) io.stderr(`demo: ${signal} again; still stopping the robots, the server and the broker\n`);
      return;
    }
    stopping = true;
    resolveStop(signal);
  };
  process.on('SIGINT', onSignal);
  process.on('SIGTERM', onSignal);
  let timer: NodeJS.Timeout | null = null;
  return {
    requested,
    stopAfter: function stopAfter(durationS: number) {
      timer = setTimeout(() => onSignal(`${durationS} s are up`), sToMs(durationS));
    },
    release: function release() {
      if (timer) clearTimeout(timer);
      process.off('SIGINT', onSignal);
      process.off('SIGTERM', onSignal);
    },
  };
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      robots: { type: 'string' },
      duration: { type: 'string' },
      port: { type: 'string' },
      'mqtt-port': { type: 'string' },
      data: { type: 'string' },
      'rollout-at': { type: 'string' },
      database: { type: 'string' },
      broker: { type: 'string' },
      'broker-user': { type: 'string' },
      replicas: { type: 'string' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    const robots = optionalNumber(values, 'robots', 12, { integer: true });
    if (robots > 500) throw new UsageError(`--robots must be at most 500 on one machine, got ${robots}`);
    const durationS = values.duration === undefined ? undefined : optionalNumber(values, 'duration', 0);
    const port = optionalNumber(values, 'port', 8080, { positive: false, integer: true });
    const mqttPort = optionalNumber(values, 'mqtt-port', 1884, { positive: false, integer: true });
    const dataDir = values.data ? resolve(io.cwd, values.data) : mkdtempSync(join(tmpdir(), 'ocellus-demo-'));
    const adminToken = io.env.OCELLUS_ADMIN_TOKEN;
    const defaultRolloutAtS = durationS === undefined ? DEFAULT_ROLLOUT_AT_S : Math.min(DEFAULT_ROLLOUT_AT_S, durationS * 0.2);
    const rolloutAtS = values['rollout-at'] === undefined ? defaultRolloutAtS : optionalNumber(values, 'rollout-at', defaultRolloutAtS, { positive: false });

    const databaseUrl = values.database ?? io.env.OCELLUS_DATABASE_URL;
    if (databaseUrl !== undefined && !/^postgres(ql)?:\/\//i.test(databaseUrl)) {
      throw new UsageError(`--database (or OCELLUS_DATABASE_URL) must be a postgres:// or postgresql:// URL, got '${databaseUrl.slice(0, 40)}'`);
    }
    if (values.broker !== undefined && !/^(mqtts?|tcp|ssl):\/\/[^/]+/.test(values.broker)) throw new UsageError(`--broker must be an mqtt:// or mqtts:// URL, got '${values.broker}'`);
    const replicas = optionalNumber(values, 'replicas', 1, { integer: true });
    if (replicas > 8) throw new UsageError(`--replicas must be at most 8 on one machine, got ${replicas}`);
    if (replicas > 1 && values.broker === undefined) throw new UsageError(REPLICAS_NEED_BROKER);
    if (values['broker-user'] !== undefined && values.broker === undefined) throw new UsageError('--broker-user needs --broker');
    const broker = values.broker === undefined ? undefined : { url: values.broker, username: values['broker-user'] ?? 'ocellus-server', password: io.env.OCELLUS_BROKER_PASSWORD ?? '' };

    io.stdout(`${DEMO_CAUTION}\n`);
    const stop = stopRequest(io);
    try {
      return await runDemo(io, stop, { dataDir, robots, port, mqttPort, durationS, adminToken, rolloutAtS, replicas, ...(databaseUrl !== undefined ? { databaseUrl } : {}), ...(broker ? { broker } : {}) });
    } finally {
      stop.release();
    }
  });
}

/** What `run` parsed from the flags and the environment. */
interface DemoRun {
  dataDir: string;
  robots: number;
  port: number;
  mqttPort: number;
  durationS: number | undefined;
  adminToken: string | undefined;
  rolloutAtS: number;
  replicas: number;
  databaseUrl?: string;
  broker?: { url: string; username: string; password: string };
}

async function runDemo(io: CliIo, stop: ReturnType<typeof stopRequest>, o: DemoRun): Promise<number> {
  const { dataDir, robots, port, mqttPort, durationS, adminToken, rolloutAtS, replicas } = o;
  io.stdout(`demo folder: ${dataDir}\n`);
  let demo;
  try {
    demo = await startDemo({
      dataDir, robots, port, mqttPort,
      rolloutAfterS: rolloutAtS,
      replicas,
      ...(o.databaseUrl !== undefined ? { databaseUrl: o.databaseUrl } : {}),
      ...(o.broker ? { broker: o.broker } : {}),
      ...(adminToken ? { adminToken } : {}),
      say: (line) => io.stdout(`${line}\n`),
    });
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code !== 'EADDRINUSE') throw e;
    io.stderr(`error: ${(e as Error).message}: a port is taken; choose others with --port and --mqtt-port (0 picks free ones)\n`);
    return EXIT_BAD_INPUT;
  }
  io.stdout(`console: ${demo.consoleUrl}\n`);
  if (demo.replicaUrls.length > 1) io.stdout(`replicas: ${demo.replicaUrls.join(', ')} (any of them serves the console)\n`);
  io.stdout(`admin token: ${demo.adminToken}${demo.tokenSource === 'environment' ? ' (from OCELLUS_ADMIN_TOKEN)' : ''}\n`);
  io.stdout(`MQTT broker: ${demo.brokerUrl}; server log and agent logs: ${demo.logFile}\n`);
  io.stdout(
    `staged rollout: a revised fruit-counting profile goes out at demo ${clock(rolloutAtS)}; to start one yourself first, open the console's Releases & rollouts page, fill in 'Start a rollout' and press Start rollout\n`,
  );
  io.stdout(durationS === undefined ? 'running; press Ctrl-C to stop\n' : `running for ${durationS} s\n`);
  if (durationS !== undefined) stop.stopAfter(durationS);

  let printing = false;
  const ticker = setInterval(() => {
    if (printing) return;
    printing = true;
    demo.summary().then(
      (s) => io.stdout(`${formatSummary(s)}\n`),
      (e: unknown) => io.stderr(`demo: summary failed: ${(e as Error).message}\n`),
    ).finally(() => (printing = false));
  }, SUMMARY_EVERY_MS);
  const why = await stop.requested;
  clearInterval(ticker);
  io.stdout(`demo: ${why}; stopping robots, agents, server and broker\n`);
  const final = await demo.summary().catch(() => null);
  await demo.stop();
  if (final) io.stdout(`${formatSummary(final, true)}\n`);
  io.stdout(`demo data kept in ${dataDir}\n`);
  return EXIT_OK;
}
