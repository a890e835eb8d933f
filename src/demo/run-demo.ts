import { randomBytes } from 'node:crypto';
import { appendFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { busForServer } from '../bus/start-bus.js';
import { startServer, type RunningServer } from '../server/start-server.js';
import { ApiError, createApiClient, type ApiClient } from '../api-client/api-client.js';
import { enrolFleet, planRobots, type EnrolledRobot } from './fleet.js';
import { createClassRelease, createRevisedRelease, loadScenario } from './load-scenario.js';
import { createDemoRobot, type DemoRobot } from './robot.js';
import { DEMO_CATALOG_DIR, DEMO_CLASSES, demoRolloutRequest } from './scenario.js';
import { GREENHOUSE_SHIFT, shiftLengthMin } from './shift.js';
import { readStoredCounts, summarizeRollout, type DemoSummary, type RolloutSummary } from './summary.js';

export interface DemoOptions {
  /** Folder of the demo: the server's data under server/, each robot's agent under robots/<id>/, demo.log. */
  dataDir: string;
  robots: number;
  /** HTTP port (0 picks a free one). */
  port: number;
  /** Embedded MQTT broker port (0 picks a free one). */
  mqttPort: number;
  /** An admin token to store on the first start (OCELLUS_ADMIN_TOKEN); a random one otherwise. */
  adminToken?: string;
  /** Seconds of robot time before the staged rollout starts (it also waits until every robot runs its first release). */
  rolloutAfterS?: number;
  /** Time compression: shift minutes per real second. */
  shiftMinPerS?: number;
  /** Progress lines for people (setup steps). */
  say: (line: string) => void;
}

export interface RunningDemo {
  url: string;
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
async function startRollout(api: ApiClient, releaseId: string, deviceIds: readonly string[], say: (line: string) => void): Promise<string> {
  const body = demoRolloutRequest(releaseId, deviceIds);
  try {
    return (await api.json<{ id: string }>('POST', '/api/v1/rollouts', body)).id;
  } catch (e) {
    const conflicts = ((e as ApiError).body as { conflicts?: Array<{ rolloutId: string }> } | null)?.conflicts;
    if (!(e instanceof ApiError) || e.status !== 409 || !conflicts) throw e;
    for (const id of new Set(conflicts.map((c) => c.rolloutId))) {
      say(`aborting rollout ${id} of an earlier demo run, which still holds these robots`);
      await api.json('POST', `/api/v1/rollouts/${id}/abort`);
    }
    return (await api.json<{ id: string }>('POST', '/api/v1/rollouts', body)).id;
  }
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
  const server = await startServer({
    dataDir: serverDir,
    port: options.port,
    adminToken: options.adminToken ?? generated,
    log,
    bus: busForServer({ embedded: { port: options.mqttPort } }),
    fleet: { tickMs: 250 },
  });
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
      await server.close();
    })();
    return stopping;
  }

  try {
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
    const started = performance.now();
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

    const rolloutAfterMs = (options.rolloutAfterS ?? 8) * 1000;
    const revisedClass = DEMO_CLASSES[0]!;
    const maybeStartRollout = async () => {
      rolloutTimer = null;
      if (stopping) return;
      const ready = robots.every((r) => r.agent.state().releaseId !== null);
      const hasTargets = robots.some((r) => r.demoClass.deviceClassId === revisedClass.deviceClassId);
      if (!hasTargets || !ready || performance.now() - started < rolloutAfterMs) {
        if (hasTargets) rolloutTimer = setTimeout(() => void maybeStartRollout().catch(fail), 500);
        return;
      }
      const revised = await createRevisedRelease(api);
      say(`profile ${revised.release.release.tasks['fruit-counting']!.profileId} revision ${revised.revision} (checks ${revised.status}) released as ${revised.release.release.id}`);
      const targets = robots.filter((r) => r.demoClass.deviceClassId === revisedClass.deviceClassId).map((r) => r.deviceId);
      rolloutId = await startRollout(api, revised.release.release.id, targets, say);
      say(`staged rollout ${rolloutId} started: one canary robot, then half of the rest, then the others; each wave must pass its gate`);
    };
    const fail = (e: unknown) => say(`could not start the rollout: ${(e as Error).message}`);
    rolloutTimer = setTimeout(() => void maybeStartRollout().catch(fail), 500);

    return {
      url: server.url,
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
          elapsedS: (performance.now() - started) / 1000,
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
