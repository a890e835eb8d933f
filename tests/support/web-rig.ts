/**
 * A rig for the console tests: the console built fresh into a temporary folder, a real server (startServer
 * with its embedded MQTT broker and rollout engine) on free loopback ports, the greenhouse demo data loaded
 * through the API as `ocellus push` does, two simulated robots (real agents over MQTT, in this process), and
 * Debian's Chromium driven by playwright-core. Demo data throughout.
 */
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { busForServer } from '../../src/bus/start-bus.js';
import { createApiClient, type ApiClient } from '../../src/api-client/api-client.js';
import { enrolFleet, planRobots, type EnrolledRobot } from '../../src/demo/fleet.js';
import { createClassRelease, loadScenario } from '../../src/demo/load-scenario.js';
import { DEMO_CATALOG_DIR, DEMO_CLASSES } from '../../src/demo/scenario.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';
import { buildConsole } from '../../src/web/server/build-console.js';

export const CHROMIUM_PATH = '/usr/bin/chromium';
export const CHROMIUM_ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run'];
export const hasChromium = existsSync(CHROMIUM_PATH);
export const SCREENSHOT_DIR = join(process.cwd(), 'test-artifacts', 'console');

export interface ConsoleRig {
  /** Content-Security-Policy violations Chromium reported on any page opened through openPage. */
  cspViolations: string[];
  server: RunningServer;
  api: ApiClient;
  adminToken: string;
  /** A token per role, for the role tests. */
  tokens: Record<'viewer' | 'engineer' | 'operator' | 'admin', string>;
  robots: EnrolledRobot[];
  /** The release each class's robots were given at the start. */
  firstReleases: Map<string, string>;
  browser: Browser;
  /** A new page at 1280×800, signed in with the token (admin unless given). */
  openPage(token?: string, viewport?: { width: number; height: number }): Promise<Page>;
  screenshot(page: Page, name: string): Promise<void>;
  close(): Promise<void>;
}

/** Polls `probe` until it returns a value that is not undefined; for conditions the browser cannot see. */
export async function until<T>(probe: () => T | undefined | Promise<T | undefined>, what: string, timeoutMs = 45_000): Promise<T> {
  const end = Date.now() + timeoutMs;
  for (;;) {
    const v = await probe();
    if (v !== undefined) return v;
    if (Date.now() > end) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 100));
  }
}

export async function startConsoleRig(): Promise<ConsoleRig> {
  const root = mkdtempSync(join(tmpdir(), 'ocellus-web-'));
  const consoleDir = join(root, 'console');
  // Built here, not read from dist/: the tests never run against a stale bundle.
  await buildConsole(consoleDir);
  const adminToken = `web-test-admin-${'x'.repeat(24)}`;
  const server = await startServer({
    dataDir: join(root, 'server'),
    port: 0,
    adminToken,
    consoleDir,
    bus: busForServer({ embedded: { port: 0 } }),
    fleet: { tickMs: 100 },
  });
  const robots: EnrolledRobot[] = [];
  let browser: Browser | null = null;
  try {
    const api = createApiClient(server.url, adminToken);
    await loadScenario(api, DEMO_CATALOG_DIR);
    const firstReleases = new Map<string, string>();
    for (const c of DEMO_CLASSES) firstReleases.set(c.deviceClassId, (await createClassRelease(api, c)).release.id);
    const tokens = { admin: adminToken } as ConsoleRig['tokens'];
    for (const role of ['viewer', 'engineer', 'operator'] as const) {
      tokens[role] = (await api.json<{ secret: string }>('POST', '/api/v1/tokens', { role, label: `console test ${role}` })).secret;
    }
    const brokerUrl = /mqtt:\/\/\S+/.exec(server.bus ?? '')?.[0];
    if (!brokerUrl) throw new Error(`the server started without its broker (${server.bus})`);
    const { publicKeyPem } = await api.json<{ publicKeyPem: string }>('GET', '/api/v1/signing-key');
    robots.push(
      ...(await enrolFleet({
        api,
        robots: planRobots(2),
        robotsDir: join(root, 'robots'),
        brokerUrl,
        serverUrl: server.url,
        publicKeyPem,
        telemetryIntervalS: 1,
        log: () => {},
      })),
    );
    for (const r of robots) await r.agent.start();
    for (const r of robots) await api.json('POST', `/api/v1/devices/${r.deviceId}/assign`, { releaseId: firstReleases.get(r.demoClass.deviceClassId) });
    for (const r of robots) await until(() => (r.agent.state().releaseId === firstReleases.get(r.demoClass.deviceClassId) ? true : undefined), `${r.deviceId} to apply its first release`);

    browser = await chromium.launch({ executablePath: CHROMIUM_PATH, args: CHROMIUM_ARGS });
    mkdirSync(SCREENSHOT_DIR, { recursive: true });
    const b = browser;
    const cspViolations: string[] = [];
    return {
      cspViolations,
      server,
      api,
      adminToken,
      tokens,
      robots,
      firstReleases,
      browser: b,
      async openPage(token = adminToken, viewport = { width: 1280, height: 800 }) {
        const context = await b.newContext({ viewport });
        const page = await context.newPage();
        // Chromium reports a blocked script, style or request on the console; the console must cause none.
        page.on('console', (message) => {
          if (/Content Security Policy/i.test(message.text())) cspViolations.push(message.text());
        });
        await page.goto(`${server.url}/`);
        await page.getByLabel('API token').fill(token);
        await page.getByRole('button', { name: 'Sign in' }).click();
        await page.getByRole('navigation', { name: 'Pages' }).waitFor();
        return page;
      },
      async screenshot(page, name) {
        await page.screenshot({ path: join(SCREENSHOT_DIR, `${name}.png`), fullPage: true });
      },
      async close() {
        await b.close().catch(() => undefined);
        await Promise.all(robots.map((r) => r.agent.stop().catch(() => undefined)));
        await server.close();
        rmSync(root, { recursive: true, force: true });
      },
    };
  } catch (e) {
    await browser?.close().catch(() => undefined);
    await Promise.all(robots.map((r) => r.agent.stop().catch(() => undefined)));
    await server.close();
    rmSync(root, { recursive: true, force: true });
    throw e;
  }
}
