import { randomBytes } from 'node:crypto';
import { appendFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { busForServer, REPLICAS_NEED_BROKER } from '../bus/start-bus.js';
import { startServer, type RunningServer } from '../server/start-server.js';
import { ApiError, createApiClient, type ApiClient } from '../api-client/api-client.js';
import { enrolFleet, planRobots, type EnrolledRobot } from './fleet.js';
import { createClassRelease, createRevisedRelease, loadScenario } from './load-scenario.js';
import { createDemoRobot, type DemoRobot } from './robot.js';
import { DEMO_CATALOG_DIR, DEMO_CLASSES, demoRolloutRequest } from './scenario.js';
import { GREENHOUSE_SHIFT, shiftLengthMin } from './shift.js';
import { clock, readStoredCounts, summarizeRollout, type DemoSummary, type RolloutSummary } from './summary.js';
import { msToS, sToMs } from '../physics/units.js';

export interface DemoOptions {
  /** Folder of the demo: the server's data under server/, each robot's agent under robots/<id>/, demo.log. */
  dataDir: string;
  robots: number;
  /** HTTP port (0 picks a free one). */
  port: number;
  /** Embedded MQTT broker port (0 picks a free one); unused with `broker`. */
  mqttPort: number;
  /** A PostgreSQL database for the store (postgres://…) instead of the SQLite file in the data folder. */
  databaseUrl?: string;
  /** An external MQTT broker (MQTT 5 with shared subscriptions for `replicas` > 1) instead of the embedded one. */
  broker?: { url: string; username: string; password: string };
  /** How many server replicas share the fleet (1 by default; more need `broker`). Extra ones listen on free ports. */
  replicas?: number;
  /** An admin token to store on the first start (OCELLUS_ADMIN_TOKEN); a random one otherwise. */
  adminToken?: string;
  /** Seconds of demo time before the staged rollout starts (it also waits until every robot runs its first release). */
  rolloutAfterS?: number;
  /** Time compression: shift minutes per real second. */
  shiftMinPerS?: number;
  /** Progress lines for people (setup steps). */
  say: (line: string) => void;
}

export interface RunningDemo {
  url: string;
  /** Every replica's URL, the first one included (one entry unless `replicas` > 1). */
  replicaUrls: string[];
  consoleUrl: string;
  brokerUrl: string;
  adminToken: string;
  /** Where the admin token came from. */
  tokenSource: 'environment' | 'generated' | 'created-in-store';
  dataDir: string;
  logFile: string;
  summary(): Promise<DemoSummary>;
  /** Stops the robots, their agents, then the server with its broker. */
  stop(): Promise<void>;
}

const TELEMETRY_INTERVAL_S = 1;

/** Makes sure the demo holds an admin token the server accepts, whatever the data folder held before. */
function adminTokenFor(server: RunningServer, given: string | undefined, generated: string): { token: string; source: RunningDemo['tokenSource'] } {
  if (given && server.store.tokens.authenticate(given)) return { token: given, source: 'environment' };
  if (!given && server.store.tokens.authenticate(generated)) return { token: generated, source: 'generated' };
  // A reused data folder: tokens exist already. Create one for this run, as `ocellus token create` would.
  const at = new Date().toISOString();
  const created = server.store.transaction(() => {
    const t = server.store.tokens.create({ role: 'admin', label: 'demo run', actor: 'demo', at });
    server.store.audit.record({ at, actor: 'demo', action: 'token.create', target: `token/${t.token.id}`, detail: { role: 'admin', label: 'demo run' } });
    return t;
  });
  return { token: created.secret, source: 'created-in-store' };
}

/** Starts a rollout; when earlier demo rollouts still hold the robots (a reused folder), aborts those first. */
type StartedRollout = { id: string; waves: Array<{ wave: number; devices: number }> };

async function startRollout(api: ApiClient, releaseId: string, deviceIds: readonly string[], say: (line: string) => void): Promise<StartedRollout> {
  const body = demoRolloutRequest(releaseId, deviceIds);
  try {
    return await api.json<StartedRollout>('POST', '/api/v1/rollouts', body);
  } catch (e) {
    const conflicts = ((e as ApiError).body as { conflicts?: Array<{ rolloutId: string }> } | null)?.conflicts;
    if (!(e instanceof ApiError) || e.status !== 409 || !conflicts) throw e;
    for (const id of new Set(conflicts.map((c) => c.rolloutId))) {
      say(`aborting rollout ${id} of an earlier demo run, which still holds these robots`);
      await api.json('POST', `/api/v1/rollouts/${id}/abort`);
    }
    return await api.json<StartedRollout>('POST', '/api/v1/rollouts', body);
  }
}

/** "3 waves: 1 robot, then 2, then 3" — as the rollout was planned for these robots. */
export function describeWaves(waves: ReadonlyArray<{ devices: number }>): string {
  const sizes = waves.map((w, i) => (i === 0 ? `${w.devices} robot${w.devices === 1 ? '' : 's'}` : `${w.devices}`));
  return `${waves.length} wave${waves.length === 1 ? '' : 's'}: ${sizes.join(', then ')}`;
}

/**
 * The one-command demo: a server with its embedded broker, the greenhouse scenario loaded through the API,
 * a release per device class, simulated robots working their shift through real agents over MQTT, and,
 * once every robot runs its first release, a staged rollout of a revised profile through the rollout API.
 */
export async function startDemo(options: DemoOptions): Promise<RunningDemo> {
  const { say } = options;
  const serverDir = join(options.dataDir, 'server');
  const robotsDir = join(options.dataDir, 'robots');
  const logFile = join(options.dataDir, 'demo.log');
  mkdirSync(options.dataDir, { recursive: true });
  const log = (line: string) => appendFileSync(logFile, `${new Date().toISOString()} ${line}\n`);
  const generated = `demo-${randomBytes(18).toString('base64url')}`;
  const replicaCount = options.replicas ?? 1;
  if (!Number.isInteger(replicaCount) || replicaCount < 1) throw new RangeError(`replicas must be a whole number of at least 1, got ${replicaCount}`);
  if (replicaCount > 1 && !options.broker) throw new Error(REPLICAS_NEED_BROKER);
  // One after another: the first makes the signing key and stores the admin token, the others read them.
  const startReplica = (n: number) => {
    const replicaId = `demo-${n}`;
    const replicas = replicaCount > 1 ? { group: 'ocellus-demo', replicaId } : undefined;
    return startServer({
      dataDir: serverDir,
      ...(options.databaseUrl !== undefined ? { databaseUrl: options.databaseUrl } : {}),
      port: n === 1 ? options.port : 0,
      adminToken: options.adminToken ?? generated,
      log: replicaCount > 1 ? (line) => log(`[${replicaId}] ${line}`) : log,
      bus: options.broker
        ? busForServer({ external: options.broker, ...(replicas ? { replicas } : {}) })
        : busForServer({ embedded: { port: options.mqttPort } }),
      ...(replicas ? { replica: { replicaId } } : {}),
      fleet: { tickMs: 250 },
    });
  };
  const server = await startReplica(1);
  const others: RunningServer[] = [];
  const robots: EnrolledRobot[] = [];
  const walkers: DemoRobot[] = [];
  let rolloutId: string | null = null;
  let rolloutTimer: NodeJS.Timeout | null = null;
  let stopping: Promise<void> | null = null;

  async function stop(): Promise<void> {
    stopping ??= (async () => {
      if (rolloutTimer) clearTimeout(rolloutTimer);
      await Promise.all(walkers.map((w) => w.stop()));
      await Promise.all(robots.map((r) => r.agent.stop().catch((e: unknown) => log(`${r.deviceId}: stop failed: ${(e as Error).message}`))));
      for (const other of others) await other.close();
      await server.close();
    })();
    return stopping;
  }

  try {
    for (let n = 2; n <= replicaCount; n++) {
      const other = await startReplica(n);
      others.push(other);
      say(`replica demo-${n} serving ${other.url} (same store and broker as ${server.url})`);
    }
    const { token, source } = adminTokenFor(server, options.adminToken, generated);
    const api = createApiClient(server.url, token);
    const brokerUrl = /mqtt:\/\/[^\s]+/.exec(server.bus ?? '')?.[0];
    if (!brokerUrl) throw new Error(`the server started without its MQTT broker (${server.bus ?? 'no bus'})`);

    say(`loading the greenhouse scenario (demo data) from ${DEMO_CATALOG_DIR} through the API`);
    const loaded = await loadScenario(api, DEMO_CATALOG_DIR);
    say(`documents: ${loaded.documents.created} created, ${loaded.documents.updated} updated, ${loaded.documents.unchanged} unchanged; ${loaded.weightsUploaded} weights uploaded` +
      (loaded.failingProfiles.length > 0 ? `; failing on purpose: ${loaded.failingProfiles.join(', ')}` : ''));
    const firstReleases = new Map<string, string>();
    for (const c of DEMO_CLASSES) {
      const signed = await createClassRelease(api, c);
      firstReleases.set(c.deviceClassId, signed.release.id);
      say(`release ${signed.release.id} (version ${signed.release.version}) for ${c.deviceClassId}: ${Object.keys(signed.release.tasks).join(', ')}, applied when idle`);
    }

    const { publicKeyPem } = await api.json<{ publicKeyPem: string }>('GET', '/api/v1/signing-key');
    const plan = planRobots(options.robots);
    robots.push(...(await enrolFleet({
      api, robots: plan, robotsDir, brokerUrl, serverUrl: server.url, publicKeyPem,
      telemetryIntervalS: TELEMETRY_INTERVAL_S, log: (id, line) => log(`${id}: ${line}`),
    })));
    say(`enrolled ${robots.length} robots: ${robots.map((r) => r.deviceId).join(', ')}`);
    // Counts in the summary are this run's: a reused data folder holds earlier runs' events.
    const baseline = readStoredCounts(server.store);
    for (const r of robots) await r.agent.start();
    // The first release goes to every robot directly: there is nothing running to protect yet.
    for (const r of robots) await api.json('POST', `/api/v1/devices/${r.deviceId}/assign`, { releaseId: firstReleases.get(r.demoClass.deviceClassId) });

    const shiftMinPerS = options.shiftMinPerS ?? 3;
    const startedMs = performance.now();
    const cycleMin = shiftLengthMin(GREENHOUSE_SHIFT);
    for (const r of robots) {
      const walker = createDemoRobot({
        agent: r.agent, schedule: GREENHOUSE_SHIFT, shiftMinPerS,
        // Robots are spread over the shift so they do not all switch at once.
        offsetMin: (r.index * cycleMin * 0.37) % cycleMin,
        nowMs: () => performance.now(),
        log: (line) => log(`${r.deviceId}: ${line}`),
      });
      walkers.push(walker);
      walker.start();
    }

    const rolloutAfterMs = sToMs(options.rolloutAfterS ?? 8);
    const revisedClass = DEMO_CLASSES[0]!;
    const maybeStartRollout = async () => {
      rolloutTimer = null;
      if (stopping) return;
      const ready = robots.every((r) => r.agent.state().releaseId !== null);
      const hasTargets = robots.some((r) => r.demoClass.deviceClassId === revisedClass.deviceClassId);
      if (!hasTargets || !ready || performance.now() - startedMs < rolloutAfterMs) {
        if (hasTargets) rolloutTimer = setTimeout(() => void maybeStartRollout().catch(fail), 500);
        return;
      }
      const revised = await createRevisedRelease(api);
      say(`profile ${revised.release.release.tasks['fruit-counting']!.profileId} revision ${revised.revision} (checks ${revised.status}) released as ${revised.release.release.id}`);
      const targets = robots.filter((r) => r.demoClass.deviceClassId === revisedClass.deviceClassId).map((r) => r.deviceId);
      const started = await startRollout(api, revised.release.release.id, targets, say);
      rolloutId = started.id;
      say(`staged rollout ${rolloutId} started at demo ${clock((performance.now() - startedMs) / 1000)}: ${describeWaves(started.waves)}; each wave must pass its gate`);
    };
    const fail = (e: unknown) => say(`could not start the rollout: ${(e as Error).message}`);
    const rolloutPlanned = robots.some((r) => r.demoClass.deviceClassId === revisedClass.deviceClassId);
    rolloutTimer = setTimeout(() => void maybeStartRollout().catch(fail), 500);

    return {
      url: server.url,
      replicaUrls: [server.url, ...others.map((o) => o.url)],
      consoleUrl: `${server.url}/`,
      brokerUrl,
      adminToken: token,
      tokenSource: source,
      dataDir: options.dataDir,
      logFile,
      stop,
      summary: async function summary(): Promise<DemoSummary> {
        let rollout: RolloutSummary | null = null;
        if (rolloutId) rollout = summarizeRollout(await api.json('GET', `/api/v1/rollouts/${rolloutId}`));
        const now = readStoredCounts(server.store);
        return {
          elapsedS: msToS(performance.now() - startedMs),
          rolloutStartsAtS: rolloutId === null && rolloutPlanned ? msToS(rolloutAfterMs) : null,
          robots: robots.length,
          robotsOnline: now.robotsOnline,
          switches: now.switches - baseline.switches,
          releasesApplied: now.releasesApplied - baseline.releasesApplied,
          eventsStored: now.eventsStored - baseline.eventsStored,
          eventsUnacked: robots.reduce((sum, r) => sum + r.agent.unackedEvents(), 0),
          rollout,
        };
      },
    };
  } catch (e) {
    await stop();
    throw e;
  }
}
