/**
 * A robot that goes out of radio coverage, read in all four places a person looks: the history API, its CSV,
 * `ocellus history` and the device page's timeline (Chromium through playwright-core). The robot is a real
 * agent over MQTT to the server's embedded broker, through a relay that can go silent. Demo data throughout.
 */
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { McapIndexedReader, TempBuffer } from '@mcap/core';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createAgent, type Agent } from '../../device-agent/agent.js';
import { agentSettingsSchema } from '../../device-agent/config.js';
import { createSimDriver } from '../../device-agent/sim-driver.js';
import { systemClock } from '../../device-agent/clock.js';
import { run as history } from '../../src/cli/history.js';
import { captureIo } from '../../src/cli/io.js';
import type { HistoryInterval } from '../../src/fleet/history/intervals.js';
import { tempDir } from '../support/agent-fixtures.js';
import { startFreezeProxy, type FreezeProxy } from '../support/freeze-proxy.js';
import { CHROMIUM_PATH, hasChromium, startConsoleRig, until, type ConsoleRig } from '../support/web-rig.js';

const ROBOT = 'gh-a-77';

describe.skipIf(!hasChromium)(`offline time in the history, the CSV, the CLI and the console (skipped without ${CHROMIUM_PATH})`, () => {
  let rig: ConsoleRig;
  let proxy: FreezeProxy;
  let agent: Agent;
  const dir = tempDir('offline-web');

  beforeAll(async () => {
    rig = await startConsoleRig();
    const brokerUrl = new URL(/mqtt:\/\/\S+/.exec(rig.server.bus ?? '')![0]);
    proxy = await startFreezeProxy(brokerUrl.hostname, Number(brokerUrl.port));
    const enrolled = await rig.api.json<{ mqtt: { password: string } }>('POST', '/api/v1/devices', { id: ROBOT, deviceClassId: 'gh-scout-a', tags: ['demo'] });
    const { publicKeyPem } = await rig.api.json<{ publicKeyPem: string }>('GET', '/api/v1/signing-key');
    mkdirSync(dir.path, { recursive: true });
    writeFileSync(join(dir.path, 'key.pem'), publicKeyPem);
    const { publicKeyPath: _unused, ...settings } = agentSettingsSchema.parse({
      deviceId: ROBOT, deviceClassId: 'gh-scout-a', brokerUrl: proxy.url, password: enrolled.mqtt.password, serverUrl: rig.server.url,
      publicKeyPath: join(dir.path, 'key.pem'), dataDir: join(dir.path, 'agent'), controlPort: 0, telemetryIntervalS: 1, keepaliveS: 1, reconnectMs: 200,
    });
    agent = createAgent({ config: { ...settings, password: enrolled.mqtt.password, publicKeyPem }, driver: createSimDriver({ clock: systemClock, timeScale: 0, efficiency: 1, seed: 77 }) });
    await agent.start();
    await rig.api.json('POST', `/api/v1/devices/${ROBOT}/assign`, { releaseId: rig.firstReleases.get('gh-scout-a') });
    await until(() => (agent.state().releaseId === rig.firstReleases.get('gh-scout-a') ? true : undefined), 'the robot to apply its release');
    expect((await agent.setTask('row-navigation')).ok).toBe(true);
    await until(() => (agent.unackedEvents() === 0 ? true : undefined), 'the switch to be stored');
  }, 180_000);

  afterAll(async () => {
    await agent?.stop().catch(() => undefined);
    await rig?.close();
    await proxy?.close();
    dir.remove();
  });

  it('out of coverage past its keep-alive: the API, the CSV, the CLI and the timeline all show it offline from the moment it went', async () => {
    proxy.freeze();
    const intervals = () => rig.api.json<{ intervals: HistoryInterval[] }>('GET', `/api/v1/devices/${ROBOT}/history`).then((h) => h.intervals);
    const list = await until(async () => {
      const l = await intervals();
      return l.at(-1)?.kind === 'offline' ? l : undefined;
    }, 'an offline interval in the history', 20_000);
    const off = list.at(-1)!;
    expect(off).toMatchObject({ task: null, end: null, reason: 'keepalive-missed', lastKnownTask: 'row-navigation', releaseId: rig.firstReleases.get('gh-scout-a') });
    const before = list.at(-2)!;
    expect(before).toMatchObject({ kind: 'profile', task: 'row-navigation', end: off.start });

    const csv = await fetch(`${rig.server.url}/api/v1/devices/${ROBOT}/history?format=csv`, { headers: { authorization: `Bearer ${rig.adminToken}` } }).then((r) => r.text());
    const rows = csv.trim().split('\r\n');
    expect(rows.at(-1)).toBe(`${ROBOT},,,,${off.releaseId},${off.start},,keepalive-missed,,,,offline,live,row-navigation`);
    expect(rows.at(-2)).toContain(`,row-navigation,`);
    expect(rows.at(-2)).toContain(`,${off.start},`);

    const io = captureIo(dir.path, { OCELLUS_SERVER: rig.server.url, OCELLUS_TOKEN: rig.adminToken });
    expect(await history([ROBOT], io)).toBe(0);
    const lines = io.out().trim().split('\n');
    const offLine = lines.find((l) => l.includes(' offline '))!;
    expect(offLine.startsWith(`${off.start}  still offline`)).toBe(true);
    expect(offLine).toContain('task unknown; keep-alive missed; last known task row-navigation');
    expect(io.out()).not.toContain('running');

    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/devices/${ROBOT}`);
    const bar = page.locator('[data-kind="offline"]');
    await bar.waitFor({ timeout: 20_000 });
    expect(await bar.getAttribute('data-start')).toBe(off.start);
    expect(await bar.getAttribute('data-end')).toBe('');
    const ended = page.locator(`[data-kind="profile"][data-end="${off.start}"]`);
    await ended.waitFor();
    expect(await page.getByRole('term').filter({ hasText: 'Last known task' }).count()).toBe(1);
    await rig.screenshot(page, 'device-offline');

    await page.goto(`${rig.server.url}/#/fleet`);
    const row = page.locator(`tr[data-device="${ROBOT}"]`);
    await expect.poll(() => row.locator('[data-task="last-known"]').textContent(), { timeout: 10_000 }).toContain('last known task: row-navigation');
    await page.context().close();
  });

  it('back in coverage, what it did meanwhile fills the offline stretch in, hatched as reported after the fact', async () => {
    // While away the robot moved on to the leaves; the agent keeps the switch on disk.
    await until(() => (agent.connected() ? undefined : true), 'the agent to notice the link is gone');
    expect((await agent.setTask('leaf-inspection')).ok).toBe(true);
    await new Promise((r) => setTimeout(r, 500));
    proxy.thaw();
    await until(() => (agent.connected() && agent.unackedEvents() === 0 ? true : undefined), 'the buffered events to be delivered');
    const h = await until(async () => {
      const l = (await rig.api.json<{ intervals: HistoryInterval[] }>('GET', `/api/v1/devices/${ROBOT}/history`)).intervals;
      return l.at(-1)?.kind === 'profile' && l.at(-1)?.reported === 'live' ? l : undefined;
    }, 'the robot back online in the history');
    const late = h.filter((i) => i.reported === 'after-the-fact');
    expect(late.map((i) => i.task)).toEqual(['row-navigation', 'leaf-inspection']);
    expect(h.some((i) => i.kind === 'offline')).toBe(false);

    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/devices/${ROBOT}`);
    await expect.poll(() => page.locator('[data-reported="after-the-fact"]').count(), { timeout: 20_000 }).toBe(2);
    await page.locator('[data-reported="after-the-fact"]').first().focus();
    expect(await page.getByRole('tooltip').textContent()).toContain('reported after the fact');
    await page.context().close();
  });

  it('ocellus history --mcap writes the same history as an MCAP recording that @mcap/core reads back, channel by channel', async () => {
    // A window that ended a moment ago, with everything the robot sent before then stored: later telemetry cannot change it between reads.
    const from = new Date(Date.now() - 3_600_000).toISOString();
    const to = new Date(Date.now() - 500).toISOString();
    await until(() => (agent.unackedEvents() === 0 ? true : undefined), 'the robot’s events to be stored');
    const io = captureIo(dir.path, { OCELLUS_SERVER: rig.server.url, OCELLUS_TOKEN: rig.adminToken });
    expect(await history([ROBOT, '--from', from, '--to', to, '--mcap', 'robot.mcap'], io)).toBe(0);
    expect(io.out()).toMatch(/^wrote \d+ bytes of MCAP to robot.mcap/);
    const bytes = readFileSync(join(dir.path, 'robot.mcap'));
    const reader = await McapIndexedReader.Initialize({ readable: new TempBuffer(bytes) });
    const topics = [...reader.channelsById.values()].map((c) => c.topic).sort();
    expect(topics).toEqual(['/ocellus/device/connection', '/ocellus/device/task_switched', '/ocellus/device/telemetry', '/ocellus/history/interval']);
    const byTopic = new Map<string, unknown[]>();
    for await (const m of reader.readMessages()) {
      const topic = reader.channelsById.get(m.channelId)!.topic;
      byTopic.set(topic, [...(byTopic.get(topic) ?? []), JSON.parse(new TextDecoder().decode(m.data))]);
      // log_time in nanoseconds since the epoch (MCAP specification, Message record).
      expect(m.logTime).toBeGreaterThan(BigInt(Date.parse(from)) * 1_000_000n);
    }
    const api = await rig.api.json<{ intervals: HistoryInterval[] }>('GET', `/api/v1/devices/${ROBOT}/history?from=${encodeURIComponent(from)}&to=${encodeURIComponent(to)}`);
    expect(byTopic.get('/ocellus/history/interval')).toEqual(api.intervals);
    const stored = await rig.api.json<{ events: Array<{ type: string; seq: number }> }>('GET', `/api/v1/devices/${ROBOT}/events?type=task-switched&from=${encodeURIComponent(from)}&to=${encodeURIComponent(to)}`);
    expect((byTopic.get('/ocellus/device/task_switched') as Array<{ seq: number }>).map((e) => e.seq)).toEqual(stored.events.map((e) => e.seq));
    expect((byTopic.get('/ocellus/device/connection') as Array<{ cause: string }>).map((c) => c.cause)).toEqual(['connected', 'keepalive-missed', 'reconnected']);
    expect((byTopic.get('/ocellus/device/telemetry') ?? []).length).toBeGreaterThan(0);
    const meta = [];
    for await (const m of reader.readMetadata({ name: 'ocellus.history' })) meta.push(m);
    expect(meta[0]!.metadata.get('deviceId')).toBe(ROBOT);

    // The API gives the same bytes' content.
    const res = await fetch(`${rig.server.url}/api/v1/devices/${ROBOT}/history?format=mcap&from=${encodeURIComponent(from)}&to=${encodeURIComponent(to)}`, { headers: { authorization: `Bearer ${rig.adminToken}` } });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-disposition')).toContain(`${ROBOT}-history.mcap`);
    const again = await McapIndexedReader.Initialize({ readable: new TempBuffer(new Uint8Array(await res.arrayBuffer())) });
    expect(again.statistics?.messageCount).toBe(reader.statistics?.messageCount);
  });

  it('ocellus history --mcap keeps an existing file and refuses a second output format', async () => {
    writeFileSync(join(dir.path, 'kept.mcap'), 'an earlier recording');
    const io = captureIo(dir.path, { OCELLUS_SERVER: rig.server.url, OCELLUS_TOKEN: rig.adminToken });
    expect(await history([ROBOT, '--mcap', 'kept.mcap'], io)).toBe(2);
    expect(io.err()).toContain('--mcap kept.mcap: already exists');
    expect(readFileSync(join(dir.path, 'kept.mcap'), 'utf8')).toBe('an earlier recording');
    const both = captureIo(dir.path, { OCELLUS_SERVER: rig.server.url, OCELLUS_TOKEN: rig.adminToken });
    expect(await history([ROBOT, '--csv', '--mcap', 'other.mcap'], both)).toBe(2);
    expect(both.err()).toContain('give one of --csv, --json and --mcap');
    expect(existsSync(join(dir.path, 'other.mcap'))).toBe(false);
  });

  it('the device page opens on a window fitted to the robot’s short life, not the last day', async () => {
    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/devices/${ROBOT}`);
    const bars = page.locator('[data-interval]');
    await bars.first().waitFor();
    // The bars together cover most of the chart's width: a day-long window would squeeze them into a sliver.
    const widths = await page.locator('.timeline-svg').evaluate((svg) => {
      const lanes = svg.querySelector('.lane-even')!.getBoundingClientRect();
      const rects = Array.from(svg.querySelectorAll('[data-interval] rect:first-child')).map((r) => r.getBoundingClientRect());
      const left = Math.min(...rects.map((r) => r.left));
      const right = Math.max(...rects.map((r) => r.right));
      return { lane: lanes.width, covered: right - left };
    });
    expect(widths.covered / widths.lane).toBeGreaterThan(0.5);
    await page.context().close();
  });

  it('the timeline is one Tab stop: arrow keys move between its bars in time order, the next Tab leaves it', async () => {
    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/devices/${ROBOT}`);
    await page.locator('[data-interval]').first().waitFor();
    const stops = await page.locator('.timeline-svg [tabindex="0"]').count();
    expect(stops).toBe(1);
    await page.locator('.timeline-svg [tabindex="0"]').focus();
    const focused = () => page.evaluate(() => document.activeElement?.getAttribute('data-item') ?? null);
    expect(await focused()).toBe('0');
    await page.keyboard.press('ArrowRight');
    expect(await focused()).toBe('1');
    await page.keyboard.press('End');
    const count = await page.locator('.timeline-svg [data-item]').count();
    expect(await focused()).toBe(String(count - 1));
    await page.keyboard.press('Home');
    expect(await focused()).toBe('0');
    await page.keyboard.press('Tab');
    expect(await focused()).toBe(null);
    await page.context().close();
  });

  it('the audit log at 820 px: every entry readable, no column squeezed or clipped', async () => {
    const page = await rig.openPage(rig.adminToken, { width: 820, height: 1180 });
    await page.goto(`${rig.server.url}/#/audit`);
    const rows = page.locator('table[aria-label="Audit log"] tbody tr');
    await expect.poll(() => rows.count()).toBeGreaterThan(3);
    const layout = await page.locator('table[aria-label="Audit log"]').evaluate((t) => {
      const wrap = t.closest('.table-wrap')!;
      const details = Array.from(t.querySelectorAll('td.detail')).map((d) => ({ width: d.getBoundingClientRect().width, clipped: d.scrollWidth > d.clientWidth + 1 }));
      return { overflowPx: wrap.scrollWidth - wrap.clientWidth, narrowest: Math.min(...details.map((d) => d.width)), clipped: details.filter((d) => d.clipped).length };
    });
    expect(layout.overflowPx).toBeLessThanOrEqual(0);
    expect(layout.clipped).toBe(0);
    // A column one character wide would be about 10 px; the detail takes most of the 820 px.
    expect(layout.narrowest).toBeGreaterThan(400);
    await rig.screenshot(page, 'audit-tablet');
    await page.context().close();
  });

  it('a rollout note shows on its card and in its audit entry; waves are numbered from 1 in the API, the card and the audit; the releases table counts robots per release', async () => {
    const releaseId = rig.firstReleases.get('gh-scout-a')!;
    const created = await rig.api.json<{ id: string; currentWave: number; waves: Array<{ wave: number }> }>('POST', '/api/v1/rollouts', {
      releaseId, target: { deviceIds: [ROBOT] }, gate: { telemetryFrames: 0 }, note: 'trial on the spare scout before bay 3 (demo data)',
    });
    expect(created.currentWave).toBe(1);
    expect(created.waves.map((w) => w.wave)).toEqual([1]);
    const audit = await rig.api.json<Array<{ action: string; target: string; detail: { note?: string; wave?: number } }>>('GET', `/api/v1/audit?target=${encodeURIComponent(`rollout/${created.id}`)}`);
    expect(audit.find((a) => a.action === 'rollout.create')?.detail.note).toBe('trial on the spare scout before bay 3 (demo data)');
    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/releases`);
    const card = page.locator(`[data-rollout="${created.id}"]`);
    await card.waitFor();
    expect(await card.locator('[data-note]').textContent()).toContain('trial on the spare scout');
    expect(await card.textContent()).toContain('wave 1 of 1');
    expect(await card.textContent()).toContain('Wave 1');
    await until(async () => {
      const a = await rig.api.json<Array<{ action: string; detail: { wave?: number } }>>('GET', `/api/v1/audit?target=${encodeURIComponent(`rollout/${created.id}`)}`);
      return a.find((e) => e.action === 'rollout.wave-start') ? a : undefined;
    }, 'the wave to start').then((a) => expect(a.find((e) => e.action === 'rollout.wave-start')!.detail.wave).toBe(1));
    const releases = await rig.api.json<Array<{ id: string; robots: { applied: { online: number; offline: number }; assigned: number } }>>('GET', '/api/v1/releases');
    const mine = releases.find((r) => r.id === releaseId)!;
    // Two robots of class gh-scout-a run it: the rig's demo scout and the spare.
    expect(mine.robots.applied.online + mine.robots.applied.offline).toBe(2);
    expect(mine.robots.assigned).toBe(2);
    const cell = page.locator('table tbody tr', { hasText: releaseId }).first().locator('[data-robots]');
    await expect.poll(() => cell.textContent()).toContain('2 robots');
    await page.context().close();
  });
});
