import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { hostname } from 'node:os';
import { busForServer, REPLICAS_NEED_BROKER } from '../bus/start-bus.js';
import { SHARE_GROUP_PATTERN } from '../protocol/topics.js';
import { startServer } from '../server/start-server.js';
import { isPostgresUrl } from '../store/index.js';
import { guard, optionalNumber, parseFlags, UsageError } from './args.js';
import { EXIT_BAD_INPUT, EXIT_OK } from './io.js';
import { portInUse, portTakenMessage } from './port-check.js';
import type { CliIo } from './io.js';
import { mibToBytes } from '../physics/units.js';

export const usage = `usage: ocellus serve [--port 8080] [--host 127.0.0.1] [--data ./ocellus-data] [--max-weights-mib 512]
                    [--database postgres://USER@HOST:PORT/DB]
                    [--mqtt-port 1884 | --broker mqtt://HOST:PORT [--broker-user ocellus-server]]
                    [--tls-cert FILE --tls-key FILE [--client-ca FILE [--crl FILE]]]
                    [--replicas [--replica-group ocellus-servers] [--replica-id HOST-PID] [--leader-poll-ms 1000]]
  Runs the server: the HTTP API under /api/v1, /metrics, and the signed-release store in the data folder
  (database, model weights, signing key). Listens on loopback unless --host says otherwise.
  --database (or OCELLUS_DATABASE_URL) keeps the store in that PostgreSQL database instead of the data
  folder's SQLite file; the data folder still holds the keys and the weights (share it between replicas).
  A port already in use is refused with exit 2 before anything is written; pick others with --port and
  --mqtt-port (e.g. when the demo holds 8080 and 1884), and point the other commands at this server with
  --server http://127.0.0.1:PORT or OCELLUS_SERVER.
  Devices connect over MQTT to the embedded broker on 127.0.0.1:--mqtt-port (0 picks a free port), or to an
  external MQTT 3.1.1/5 broker given by --broker, where the server logs in as --broker-user with the
  password in OCELLUS_BROKER_PASSWORD.
  --tls-cert/--tls-key (PEM) make the HTTP API https:// and the embedded broker mqtts://. --client-ca makes
  every device log in to the embedded broker with a certificate signed by that CA, its CN being the device
  id; --crl lists revoked device certificates (checked when a device connects: also run
  'ocellus device revoke' to end a live session). Use TLS on any network you do not fully control.
  --replicas runs this server as one of several on the same store and the same external MQTT 5 broker
  (--broker is required: the embedded broker cannot share subscriptions): device messages are shared out
  through the broker's shared subscription --replica-group, one replica at a time (the holder of the
  leader lease, polled every --leader-poll-ms) runs rollouts, calibration and drift, and changes reach
  every replica's console. See docs/scale-out.md.
  Environment: OCELLUS_ADMIN_TOKEN (24+ characters) is stored as an admin token on the first start, when
  no token exists yet. Stops cleanly on Ctrl-C (SIGINT) or SIGTERM.
`;

/** Resolves when the process is asked to stop. */
function stopSignal(): Promise<string> {
  return new Promise((resolvePromise) => {
    const onSignal = (signal: string) => {
      process.off('SIGINT', onSignal);
      process.off('SIGTERM', onSignal);
      resolvePromise(signal);
    };
    process.on('SIGINT', onSignal);
    process.on('SIGTERM', onSignal);
  });
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      port: { type: 'string' },
      host: { type: 'string' },
      data: { type: 'string' },
      database: { type: 'string' },
      'max-weights-mib': { type: 'string' },
      'mqtt-port': { type: 'string' },
      broker: { type: 'string' },
      'broker-user': { type: 'string' },
      'tls-cert': { type: 'string' },
      'tls-key': { type: 'string' },
      'client-ca': { type: 'string' },
      crl: { type: 'string' },
      replicas: { type: 'boolean' },
      'replica-group': { type: 'string' },
      'replica-id': { type: 'string' },
      'leader-poll-ms': { type: 'string' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    const port = optionalNumber(values, 'port', 8080, { positive: false, integer: true });
    const maxWeightsMib = optionalNumber(values, 'max-weights-mib', 512);
    const dataDir = resolve(io.cwd, values.data ?? 'ocellus-data');
    const adminToken = io.env.OCELLUS_ADMIN_TOKEN;
    const databaseUrl = values.database ?? io.env.OCELLUS_DATABASE_URL;
    if (databaseUrl !== undefined && !isPostgresUrl(databaseUrl)) {
      throw new UsageError(`--database (or OCELLUS_DATABASE_URL) must be a postgres:// or postgresql:// URL, got '${databaseUrl.slice(0, 40)}'`);
    }
    const mqttPort = optionalNumber(values, 'mqtt-port', 1884, { positive: false, integer: true });
    if (values.broker !== undefined && !/^(mqtts?|tcp|ssl):\/\/[^/]+/.test(values.broker)) {
      throw new UsageError(`--broker must be an mqtt:// or mqtts:// URL, got '${values.broker}'`);
    }
    const pem = (flag: 'tls-cert' | 'tls-key' | 'client-ca' | 'crl') => {
      const file = values[flag];
      if (file === undefined) return undefined;
      try {
        return readFileSync(resolve(io.cwd, file), 'utf8');
      } catch (e) {
        throw new UsageError(`--${flag} ${file}: ${(e as Error).message}`);
      }
    };
    if ((values['tls-cert'] === undefined) !== (values['tls-key'] === undefined)) throw new UsageError('--tls-cert and --tls-key go together');
    if (values['tls-cert'] === undefined && (values['client-ca'] !== undefined || values.crl !== undefined)) {
      throw new UsageError('--client-ca and --crl need --tls-cert and --tls-key');
    }
    if (values.crl !== undefined && values['client-ca'] === undefined) throw new UsageError('--crl needs --client-ca');
    const replicaFlags = (['replica-group', 'replica-id', 'leader-poll-ms'] as const).filter((f) => values[f] !== undefined);
    if (!values.replicas && replicaFlags.length > 0) throw new UsageError(`--${replicaFlags[0]} needs --replicas`);
    if (values.replicas && values.broker === undefined) throw new UsageError(REPLICAS_NEED_BROKER);
    const replicaGroup = values['replica-group'] ?? 'ocellus-servers';
    if (!SHARE_GROUP_PATTERN.test(replicaGroup)) throw new UsageError(`--replica-group '${replicaGroup}': use 1 to 64 letters, digits, '.', '_' or '-' (no '/', '+' or '#')`);
    const replicaId = values['replica-id'] ?? `${hostname()}-${process.pid}`;
    if (!SHARE_GROUP_PATTERN.test(replicaId)) throw new UsageError(`--replica-id '${replicaId}': use 1 to 64 letters, digits, '.', '_' or '-'`);
    const leaderPollMs = optionalNumber(values, 'leader-poll-ms', 1000, { integer: true });
    const replicas = values.replicas ? { group: replicaGroup, replicaId } : undefined;
    const certPem = pem('tls-cert');
    const keyPem = pem('tls-key');
    const clientCaPem = pem('client-ca');
    const crlPem = pem('crl');
    const tls = certPem && keyPem ? { certPem, keyPem } : undefined;
    const host = values.host ?? '127.0.0.1';
    // Before anything is written (data folder, signing key, admin token): a taken port is bad input, exit 2.
    const taken: string[] = [];
    const httpWhy = await portInUse(host, port);
    if (httpWhy) taken.push(portTakenMessage('HTTP', host, port, httpWhy, '--port'));
    if (!values.broker) {
      const mqttWhy = await portInUse('127.0.0.1', mqttPort);
      if (mqttWhy) taken.push(portTakenMessage('MQTT (the embedded broker)', '127.0.0.1', mqttPort, mqttWhy, '--mqtt-port'));
    }
    if (taken.length > 0) {
      io.stderr(taken.map((t) => `${t}\n`).join(''));
      return EXIT_BAD_INPUT;
    }
    const bus = values.broker
      ? busForServer({
          external: { url: values.broker, username: values['broker-user'] ?? 'ocellus-server', password: io.env.OCELLUS_BROKER_PASSWORD ?? '' },
          ...(replicas ? { replicas } : {}),
        })
      : busForServer({
          embedded: {
            port: mqttPort,
            ...(tls ? { tls: { ...tls, ...(clientCaPem ? { clientCaPem } : {}), ...(crlPem ? { crlPem } : {}) } } : {}),
          },
          // The server's own client checks the broker's certificate against the CA that signed it, when given.
          ...(tls && clientCaPem ? { serverClientCaPem: clientCaPem } : {}),
        });
    const server = await startServer({
      dataDir,
      ...(databaseUrl !== undefined ? { databaseUrl } : {}),
      host,
      port,
      maxWeightsBytes: Math.floor(mibToBytes(maxWeightsMib)),
      ...(adminToken ? { adminToken } : {}),
      bus,
      ...(tls ? { tls } : {}),
      ...(replicas ? { replica: { replicaId, leaderPollMs } } : {}),
      log: (line) => io.stderr(`${line}\n`),
    }).catch((e: NodeJS.ErrnoException) => {
      // Taken between the check and the start (another process was quicker).
      if (e.code !== 'EADDRINUSE') throw e;
      io.stderr(`error: cannot listen: ${e.message}; choose other ports with --port N and --mqtt-port N\n`);
      return null;
    });
    if (!server) return EXIT_BAD_INPUT;
    if (server.adminSeed === 'stored') io.stderr('ocellus: stored OCELLUS_ADMIN_TOKEN as the first admin token\n');
    if (server.adminSeed === 'not-first-start') io.stderr('ocellus: OCELLUS_ADMIN_TOKEN ignored: tokens already exist (manage them with an admin token)\n');
    if (server.store.tokens.count() === 0) {
      io.stderr(`ocellus: no API tokens yet; create one with: ocellus token create --role admin --data ${dataDir}\n`);
    }
    io.stdout(`${server.url}\n`);
    const signal = await stopSignal();
    io.stderr(`ocellus: ${signal}: closing\n`);
    await server.close();
    return EXIT_OK;
  });
}
