/**
 * The web console in a real browser (Debian's Chromium through playwright-core) against a real server with
 * its broker, rollout engine and two simulated robots, on the greenhouse demo data. Screenshots of every
 * page go to test-artifacts/console/.
 */
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CHROMIUM_PATH, hasChromium, startConsoleRig, until, type ConsoleRig } from '../support/web-rig.js';

if (!hasChromium) console.warn(`web console tests skipped: no Chromium at ${CHROMIUM_PATH} (apt-get install -y chromium)`);

/** How far the validation table reaches past the right edge of its panel, in CSS pixels (≤ 0: it fits). */
async function tableOverflowPx(page: import('playwright-core').Page): Promise<number> {
  return page.locator('table.checks').evaluate((t) => {
    const wrap = t.closest('.table-wrap')!;
    return Math.max(wrap.scrollWidth - wrap.clientWidth, t.getBoundingClientRect().right - wrap.getBoundingClientRect().right);
  });
}

describe.skipIf(!hasChromium)(`web console in Chromium (skipped without ${CHROMIUM_PATH})`, () => {
  let rig: ConsoleRig;

  beforeAll(async () => {
    rig = await startConsoleRig();
  }, 180_000);

  afterAll(async () => {
    await rig?.close();
  });

  it('is served with a Content-Security-Policy and frame-ancestors, and runs under it without a violation', async () => {
    const res = await fetch(`${rig.server.url}/`);
    expect(res.headers.get('content-security-policy')).toContain("frame-ancestors 'none'");
    expect(res.headers.get('x-frame-options')).toBe('DENY');
    const page = await rig.openPage();
    for (const hash of ['#/profiles', '#/releases', '#/rollouts', '#/']) {
      await page.goto(`${rig.server.url}/${hash}`);
      await page.getByRole('navigation', { name: 'Pages' }).waitFor();
    }
    expect(rig.cspViolations).toEqual([]);
    await page.context().close();
  });

  it('the fleet page lists every enrolled robot with its class, connection and applied release, and shows a new one live', async () => {
    const page = await rig.openPage();
    for (const r of rig.robots) {
      const row = page.locator(`tr[data-device="${r.deviceId}"]`);
      await row.waitFor();
      await expect.poll(() => row.textContent()).toContain(r.demoClass.deviceClassId);
      await expect.poll(() => row.textContent()).toContain('online');
      await expect.poll(() => row.textContent()).toContain(rig.firstReleases.get(r.demoClass.deviceClassId)!);
    }
    // Enrolled through the API behind the page's back: the event stream makes the page reload its list.
    await rig.api.json('POST', '/api/v1/devices', { id: 'gh-a-99', deviceClassId: 'gh-scout-a', tags: ['demo', 'spare'] });
    const spare = page.locator('tr[data-device="gh-a-99"]');
    await spare.waitFor();
    expect(await spare.textContent()).toContain('offline');
    await page.getByLabel('Connection').selectOption('online');
    await expect.poll(() => page.locator('tr[data-device]').count()).toBe(rig.robots.length);
    await page.getByLabel('Connection').selectOption('all');
    await rig.screenshot(page, 'fleet');
    await page.setViewportSize({ width: 820, height: 1180 });
    await rig.screenshot(page, 'fleet-tablet');
    await page.context().close();
  });

  it('a profile edited past its latency budget shows the failing check with its figures, and a plain release of it is blocked until an override reason is given', async () => {
    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/profiles`);
    // The demo's failing profile shows as failing in the overview (demo data: leaf-inspection-wide-open).
    await page.locator('li', { hasText: 'leaf-inspection-wide-open' }).getByText('fail').waitFor();
    await rig.screenshot(page, 'profiles');
    await page.getByRole('link', { name: 'fruit-counting-a' }).click();
    await page.getByRole('heading', { level: 1 }).filter({ hasText: 'revision 1' }).waitFor();
    const latency = page.locator('tr[data-check="latency"]');
    expect(await latency.getAttribute('data-status')).toBe('pass');

    // 120 ms of exposure alone exceeds the task's 100 ms budget (demo data, fruit-counting.json).
    await page.getByRole('spinbutton', { name: 'Exposure (µs)' }).fill('120000');
    await expect.poll(() => latency.getAttribute('data-status'), { timeout: 20_000 }).toBe('fail');
    const draft = await rig.api.json<{ profile: Record<string, any> }>('GET', '/api/v1/profiles/fruit-counting-a');
    const expected = await rig.api.json<{ report: { checks: Array<{ code: string; actual: number; limit: number }> } }>('POST', '/api/v1/validate', {
      ...draft.profile,
      camera: { ...draft.profile.camera, exposureUs: 120000 },
    });
    const check = expected.report.checks.find((c) => c.code === 'latency')!;
    expect(check.actual).toBeGreaterThan(check.limit);
    const row = (await latency.textContent()) ?? '';
    expect(row).toContain('fail');
    expect(row).toContain(`${Math.round(check.limit)} ms`);
    expect(row).toContain(`${Math.round(check.actual)} ms`);
    await rig.screenshot(page, 'profile-editor-failing');
    // The checks table fits its panel at 1280 px: no column cut off at the right edge.
    expect(await tableOverflowPx(page)).toBeLessThanOrEqual(0);
    // The plots sit beside the checks at 1280 px, not below them: the combined blur with its parts and the MTF.
    const checksBox = (await page.locator('.report-checks').boundingBox())!;
    const plotsBox = (await page.locator('.report-plots').boundingBox())!;
    expect(plotsBox.x).toBeGreaterThanOrEqual(checksBox.x + checksBox.width - 1);
    expect(plotsBox.y).toBeLessThan(checksBox.y + checksBox.height);
    for (const series of ['totalPx', 'defocusPx', 'diffractionPx', 'pixelPx', 'motionPx']) {
      expect(await page.locator(`.report-plots path[data-series="${series}"]`).count(), series).toBe(1);
    }
    expect(await page.locator('svg[data-chart="mtf"] path[data-series="system"]').count()).toBe(1);

    await page.getByRole('button', { name: 'Save as revision 2' }).click();
    await page.getByText('Saved as revision 2 (fail).').waitFor();
    // Compare through the diff route: the one field changed, before and after.
    await page.getByLabel('From revision').selectOption('1');
    await page.getByLabel('To revision').selectOption('2');
    await page.getByRole('button', { name: 'Compare' }).click();
    const diff = page.getByRole('table', { name: 'Differences from revision 1 to 2' });
    await diff.waitFor();
    const cells = await diff.locator('tbody tr').evaluateAll((rows) => rows.map((r) => Array.from(r.children).map((c) => (c.textContent ?? '').trim()).join('|')));
    expect(cells).toEqual([`camera.exposureUs|changed|${draft.profile.camera.exposureUs}|120000`]);
    await rig.screenshot(page, 'profile-revisions');

    await page.goto(`${rig.server.url}/#/releases`);
    await page.getByLabel('Device class').selectOption('gh-scout-a');
    await page.getByLabel('Revision of fruit-counting-a').selectOption('2');
    const create = page.getByRole('button', { name: 'Create release with override' });
    await create.waitFor();
    expect(await create.isDisabled()).toBe(true);
    await page.getByText('A plain release is refused').waitFor();
    await page.getByLabel('Override reason (required)').fill('demo data: trial of a long exposure in the dark bay, one robot only');
    expect(await create.isDisabled()).toBe(false);
    await rig.screenshot(page, 'release-override');
    await create.click();
    await page.getByText('created and signed').waitFor();
    const releases = await rig.api.json<Array<{ id: string; overridden: boolean; tasks: Record<string, { revision: number }> }>>('GET', '/api/v1/releases?deviceClass=gh-scout-a');
    const made = releases.find((r) => r.overridden);
    expect(made?.tasks['fruit-counting']?.revision).toBe(2);
    await page.locator(`tr[data-release="${made!.id}"]`).getByText('override').waitFor();
    await page.context().close();
  });

  it('the planner lists the front the API finds, and opening a candidate fills the editor, whose checks all pass', async () => {
    const page = await rig.openPage(rig.tokens.engineer);
    await page.goto(`${rig.server.url}/#/planner/fruit-counting/gh-scout-a`);
    await page.getByRole('button', { name: 'Search settings' }).click();
    const table = page.getByRole('table', { name: 'Candidates on the front' });
    await table.waitFor();
    // The same question through the API (demo data): the page lists exactly its front, in its order.
    const answer = await rig.api.json<{ front: Array<{ modelId: string; camera: { exposureUs: number; fNumber: number }; memory: { weightBufferKib: number } }> }>(
      'POST',
      '/api/v1/plan',
      { taskId: 'fruit-counting', deviceClassId: 'gh-scout-a', options: { granuleKib: 64 } },
    );
    expect(answer.front.length).toBeGreaterThan(0);
    const rows = await table.locator('tbody tr').evaluateAll((trs) => trs.map((tr) => tr.querySelector('th')!.textContent!.trim()));
    expect(rows).toEqual(answer.front.map((c) => c.modelId));
    expect(await page.locator('.front-point').count()).toBe(answer.front.length);
    await page.getByText('Settings change what the robot sees.').first().waitFor();
    await rig.screenshot(page, 'planner');

    await page.getByRole('button', { name: 'Open candidate 1 in the editor' }).click();
    await page.getByText('Settings of candidate 1 from the planner').waitFor();
    const first = answer.front[0]!;
    expect(await page.getByRole('spinbutton', { name: 'Exposure (µs)' }).inputValue()).toBe(String(first.camera.exposureUs));
    expect(await page.locator('#field-modelId').inputValue()).toBe(first.modelId);
    expect(await page.getByRole('spinbutton', { name: 'Weight buffer (KiB)' }).inputValue()).toBe(String(first.memory.weightBufferKib));
    // The editor shows a report only once the validator has answered for these settings.
    await page.locator('tr[data-check]').first().waitFor();
    await page.getByText(/^0 failing, \d+ warning, \d+ passing$/).waitFor();
    expect(await page.locator('tr[data-check][data-status="fail"]').count()).toBe(0);
    expect(await page.locator('tr[data-check]').count()).toBeGreaterThan(10);
    await page.getByRole('button', { name: /Save as revision/ }).waitFor();
    expect(await tableOverflowPx(page)).toBeLessThanOrEqual(0);
    await rig.screenshot(page, 'planner-editor');
    // A tablet held upright: the editor stacks and the checks table still fits.
    await page.setViewportSize({ width: 820, height: 1180 });
    await rig.screenshot(page, 'profile-editor-tablet');
    expect(await tableOverflowPx(page)).toBeLessThanOrEqual(0);
    await page.context().close();
  });

  it("the editor's \"what the robot sees\" shows the server's render of an uploaded image at a chosen distance, leaves the plots where they are, and refuses an oversized image", async () => {
    const page = await rig.openPage(rig.tokens.engineer);
    await page.goto(`${rig.server.url}/#/profiles/fruit-counting-a`);
    // Whichever revision the tests before this one left (the latency test saves one).
    await page.getByRole('heading', { level: 1 }).filter({ hasText: /revision \d+/ }).waitFor();
    await page.locator('figure.chart').first().waitFor();
    // Where each plot sits in the page (scrolling aside): opening and using the preview must not move them.
    const charts = () =>
      page.locator('figure.chart').evaluateAll((fs) =>
        fs.map((f) => {
          const r = f.getBoundingClientRect();
          return [r.left + window.scrollX, r.top + window.scrollY, r.width, r.height];
        }),
      );
    const before = await charts();
    // A card of 8 px bars, 320×240 (made here): its edges show the blur.
    const raw = Buffer.alloc(320 * 240 * 3);
    for (let i = 0; i < 320 * 240; i++) raw.fill(Math.floor((i % 320) / 8) % 2 ? 255 : 0, i * 3, i * 3 + 3);
    const card = await sharp(raw, { raw: { width: 320, height: 240, channels: 3 } }).png().toBuffer();

    await page.getByText('What the robot sees').click();
    await page.getByLabel('Sample image').setInputFiles({ name: 'bars.png', mimeType: 'image/png', buffer: card });
    await page.getByRole('spinbutton', { name: 'Object distance (m)' }).fill('0.6');
    await page.getByRole('button', { name: 'Render preview' }).click();
    const img = page.locator('figure.preview-figure img');
    await img.waitFor();
    const src = (await img.getAttribute('src'))!;
    // The same request through the API gives the same PNG, byte for byte.
    const { profile } = await rig.api.json<{ profile: unknown }>('GET', '/api/v1/profiles/fruit-counting-a');
    const res = await fetch(`${rig.server.url}/api/v1/render-preview`, {
      method: 'POST',
      headers: { authorization: `Bearer ${rig.tokens.engineer}`, 'content-type': 'application/json' },
      body: JSON.stringify({ profile, image: card.toString('base64'), distanceM: 0.6 }),
    });
    expect(res.status).toBe(200);
    expect(src).toBe(`data:image/png;base64,${Buffer.from(await res.arrayBuffer()).toString('base64')}`);
    expect(await page.locator('figure.preview-figure figcaption').textContent()).toContain('at 0.6 m');
    expect(await charts()).toEqual(before);
    await rig.screenshot(page, 'profile-editor-preview');

    const big = await sharp({ create: { width: 5000, height: 4000, channels: 3, background: { r: 90, g: 130, b: 70 } } }).png().toBuffer();
    await page.getByLabel('Sample image').setInputFiles({ name: 'huge.png', mimeType: 'image/png', buffer: big });
    await page.getByRole('button', { name: 'Render preview' }).click();
    await page.getByRole('alert').filter({ hasText: 'No preview' }).waitFor();
    expect(await page.getByRole('alert').filter({ hasText: 'No preview' }).textContent()).toContain('5000×4000 px; at most 16777216 pixels (4096×4096)');
    expect(rig.cspViolations).toEqual([]);
    await page.context().close();
  });

  it('for a task no setting can meet, the planner says so and lists the binding constraints and the nearest misses', async () => {
    // Demo data: fruit counting in 5 ms. Latency = exposure + readout + ISP + inference (README, "Frame
    // budget"), and gh-scout-a's readout (9 ms) alone exceeds it.
    const { document: base } = await rig.api.json<{ document: Record<string, unknown> }>('GET', '/api/v1/tasks/fruit-counting');
    await rig.api.json('POST', '/api/v1/tasks', { ...base, id: 'fruit-counting-5ms', name: 'Fruit counting in 5 ms (demo data)', latencyBudgetMs: 5 });
    // The planner searches only models measured for the task: the detector's new version says it was.
    const { document: finder } = await rig.api.json<{ document: Record<string, any> }>('GET', '/api/v1/models/fruit-finder-a');
    await rig.api.json('PUT', '/api/v1/models/fruit-finder-a', { ...finder, measuredForTaskIds: [...finder.measuredForTaskIds, 'fruit-counting-5ms'] });
    const page = await rig.openPage(rig.tokens.engineer);
    await page.goto(`${rig.server.url}/#/planner/fruit-counting-5ms/gh-scout-a`);
    await page.getByRole('button', { name: 'Search settings' }).click();
    await page.getByText('No candidate meets every check.').waitFor();
    expect(await page.getByRole('table', { name: 'Candidates on the front' }).count()).toBe(0);
    expect(await page.locator('[data-constraint="latency"]').textContent()).toContain('fails');
    const misses = await page.locator('[data-near-miss]').allTextContents();
    expect(misses.length).toBeGreaterThan(0);
    for (const m of misses) expect(m).toContain('latency');
    await rig.screenshot(page, 'planner-empty');
    await page.context().close();
  });

  it('a rollout started from the page moves a simulated robot to the new release, wave by wave', async () => {
    const robot = rig.robots.find((r) => r.demoClass.deviceClassId === 'gh-scout-a')!;
    // A passing release to roll out: every task's revision 1 (demo data).
    const first = await rig.api.json<{ release: { tasks: Record<string, { profileId: string; revision: number }> } }>('GET', `/api/v1/releases/${rig.firstReleases.get('gh-scout-a')}`);
    const tasks = Object.fromEntries(Object.entries(first.release.tasks).map(([t, x]) => [t, { profileId: x.profileId, revision: x.revision }]));
    const target = await rig.api.json<{ release: { id: string } }>('POST', '/api/v1/releases', { deviceClassId: 'gh-scout-a', tasks, defaultTask: 'fruit-counting', applyPolicy: 'when-idle' });
    const releaseId = target.release.id;

    const page = await rig.openPage(rig.tokens.operator);
    await page.goto(`${rig.server.url}/#/releases`);
    await page.getByLabel('Release', { exact: true }).selectOption(releaseId);
    await page.getByLabel('chosen ones').check();
    await page.getByRole('checkbox', { name: new RegExp(robot.deviceId) }).check();
    await page.getByLabel('Waves (robots or %, comma-separated)').fill('1');
    await page.getByText('Gate between waves').click();
    await page.getByLabel('Frames measured before judging (0: skip)').fill('0');
    await page.getByRole('button', { name: 'Start rollout' }).click();
    const started = await page.getByText(/Rollout .* started\./).textContent();
    const rolloutId = /Rollout (\S+) started/.exec(started ?? '')![1]!;

    await until(() => (robot.agent.state().releaseId === releaseId ? true : undefined), `${robot.deviceId} to apply ${releaseId}`);
    const card = page.locator(`article[data-rollout="${rolloutId}"]`);
    await expect.poll(() => card.locator('.rollout-head').textContent(), { timeout: 30_000 }).toContain('completed');
    // The card's head comes from the rollout list and its devices from the rollout's own view, loaded just after.
    await expect.poll(() => card.locator(`[data-rollout-device="${robot.deviceId}"]`).getAttribute('data-status'), { timeout: 10_000 }).toBe('passed');
    await rig.screenshot(page, 'rollouts');
    await page.context().close();
  });

  it("the device page's timeline shows exactly the intervals the history API returns, with details on hover", async () => {
    const robot = rig.robots.find((r) => r.demoClass.deviceClassId === 'gh-scout-a')!;
    await robot.agent.setTask('leaf-inspection');
    // One cleared and one open drift episode, as the drift monitor would store them (demo data; with one robot
    // per class in this rig the monitor itself never compares, so it leaves them as they are).
    const drift = rig.server.store.drift;
    const episode = { deviceId: robot.deviceId, deviceClassId: robot.demoClass.deviceClassId, tolerance: 0.15 };
    const cleared = drift.onset({ ...episode, quantity: 'energy', onsetAt: '2026-03-01T08:00:00.000Z', deviceFactor: 0.8, classFactor: 1, deviation: -0.2 });
    drift.clear(cleared.id, '2026-03-01T08:40:00.000Z');
    drift.onset({ ...episode, quantity: 'latency', onsetAt: '2026-03-01T09:00:00.000Z', deviceFactor: 1.3, classFactor: 1, deviation: 0.3 });
    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/devices/${robot.deviceId}`);
    const open = page.locator('[data-drift="latency"][data-open="true"]');
    await open.waitFor();
    expect(await open.textContent()).toContain('drifting');
    expect(await open.textContent()).toContain('×1.3 of its class');
    expect(await page.locator('[data-drift="energy"][data-open="false"]').textContent()).toContain('cleared');
    await page.getByRole('heading', { name: 'Profiles over time' }).waitFor();
    const history = await until(async () => {
      const h = await rig.api.json<{ intervals: Array<{ seq: number; task: string; profileId: string; profileRevision: number; releaseId: string }> }>('GET', `/api/v1/devices/${robot.deviceId}/history`);
      return h.intervals.some((i) => i.task === 'leaf-inspection') ? h : undefined;
    }, 'the switch to leaf inspection in the history');
    const expected = history.intervals.map((i) => `${i.seq}:${i.task}|${i.profileId}|${i.profileRevision}|${i.releaseId}`).sort();
    const shown = async () =>
      (await page.locator('[data-interval]').evaluateAll((els) => els.map((e) => `${e.getAttribute('data-seq')}:${e.getAttribute('data-interval')}`))).sort();
    await expect.poll(shown, { timeout: 20_000 }).toEqual(expected);

    // From a day down to two minutes, the window still ending at the present.
    await page.getByRole('button', { name: '15 min' }).click();
    for (let i = 0; i < 3; i++) await page.getByRole('button', { name: 'zoom in' }).click();
    const last = page.locator(`[data-seq="${history.intervals.at(-1)!.seq}"]`);
    await last.focus();
    const tip = page.getByRole('tooltip');
    await tip.waitFor();
    expect(await tip.textContent()).toContain('leaf-inspection');
    await rig.screenshot(page, 'device');
    await page.context().close();
  });

  it('the audit page lists the override release with its reason, filtered by action', async () => {
    const page = await rig.openPage();
    await page.goto(`${rig.server.url}/#/audit`);
    await page.getByLabel('Action, e.g. release.create').fill('release.create');
    await page.getByRole('button', { name: 'Apply filters' }).click();
    await expect.poll(() => page.locator('table[aria-label="Audit log"] tbody tr').count()).toBeGreaterThanOrEqual(3);
    await page.getByText('trial of a long exposure').first().waitFor();
    const actions = await page.locator('table[aria-label="Audit log"] tbody tr td:nth-child(3)').allTextContents();
    expect(new Set(actions)).toEqual(new Set(['release.create']));
    await rig.screenshot(page, 'audit');
    await page.context().close();
  });

  it('the sign-in page refuses an unknown token and says so', async () => {
    const context = await rig.browser.newContext({ viewport: { width: 1280, height: 800 } });
    const page = await context.newPage();
    await page.goto(`${rig.server.url}/`);
    await page.getByLabel('API token').fill('not-a-token-of-this-server');
    await page.getByRole('button', { name: 'Sign in' }).click();
    expect(await page.getByRole('alert').textContent()).toContain('unknown or revoked token');
    await rig.screenshot(page, 'sign-in');
    await context.close();
  });

  it('a viewer sees the pages but none of the buttons that change anything', async () => {
    const page = await rig.openPage(rig.tokens.viewer);
    expect(await page.locator('.role').textContent()).toContain('viewer');
    await page.goto(`${rig.server.url}/#/releases`);
    await page.getByRole('heading', { name: 'Rollouts', exact: true }).waitFor();
    await page.locator('article[data-rollout]').first().waitFor();
    for (const name of ['Create release', 'Start rollout', 'Pause', 'Resume', 'Roll back…', 'Stop for good']) {
      expect(await page.getByRole('button', { name, exact: true }).count(), name).toBe(0);
    }
    await page.goto(`${rig.server.url}/#/planner`);
    await page.getByText('Searching takes the engineer role or above').waitFor();
    expect(await page.getByRole('button', { name: 'Search settings' }).count()).toBe(0);
    await page.goto(`${rig.server.url}/#/profiles/fruit-counting-a`);
    await page.getByText('Your role can try settings here but not save them.').waitFor();
    expect(await page.getByRole('button', { name: /Save as revision/ }).count()).toBe(0);
    await rig.screenshot(page, 'profile-viewer');
    await page.context().close();
  });
});
