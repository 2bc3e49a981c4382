/**
 * The app as a new user meets it, in real Chromium against browser mode (real server, real onnxruntime, real SQLite):
 * open the demo → scan → ranked roster → open the top unit → charts drawn → filter by a label → keyboard → reload.
 * Saves a screenshot of every screen under test-output/screenshots/ (light and dark).
 * Assertions wait for states, never for durations.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { build } from 'vite';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { startServer, type RunningServer } from '../../app/server/index.ts';
import { sampleDataDir } from '../../core/api/files.ts';
import { createApi, runScan } from '../../core/api/index.ts';
import { wideFixture, slowFixture, type Fixture } from './fixtures.ts';

const repo = fileURLToPath(new URL('../../', import.meta.url));
const shots = path.join(repo, 'test-output', 'screenshots');
const CHROMIUM = '/usr/bin/chromium';
const demoBuilt = fs.existsSync(path.join(sampleDataDir(), 'tiles-model.onnx')) && fs.existsSync(path.join(sampleDataDir(), 'tiles', 'manifest.json'));
const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];

describe('Skein in Chromium (browser mode)', () => {
  let tmp: string;
  let server: RunningServer;
  let context: BrowserContext;
  let page: Page;
  const problems: string[] = [];
  let wide: Fixture;
  let slow: Fixture;

  const shot = async (name: string) => {
    await page.screenshot({ path: path.join(shots, `${name}.png`), fullPage: false });
  };

  /** Sorts the roster by concept count, largest first, whatever the current order. */
  const mostMixedFirst = async () => {
    const header = page.locator('[data-sort="concepts"]');
    while ((await header.getAttribute('aria-sort')) !== 'descending') await header.click();
  };

  beforeAll(async () => {
    tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-e2e-'));
    fs.mkdirSync(shots, { recursive: true });
    for (const f of fs.readdirSync(shots)) if (f.startsWith('failed-')) fs.rmSync(path.join(shots, f));
    const rendererDir = path.join(tmp, 'renderer');
    await build({ configFile: path.join(repo, 'app/renderer/vite.config.ts'), logLevel: 'error', build: { outDir: rendererDir, emptyOutDir: true } });
    const dataDir = path.join(tmp, 'home');
    fs.mkdirSync(dataDir);
    if (!demoBuilt) throw new Error(`The demo is not built (${sampleDataDir()}); run npm run sample-data.`);
    wide = wideFixture(path.join(tmp, 'wide'));
    await runScan({ ...wide, layers: ['h'] }); // the roster's 10^5 rows; its scan is not what is tested
    // Enough probes that the resumed scan is still running when the screen first polls it, on an idle machine too.
    slow = slowFixture(path.join(tmp, 'slow'), { probes: 2000 });
    server = await startServer({ port: 0, roots: [sampleDataDir(), dataDir, path.join(tmp, 'wide'), path.join(tmp, 'slow')], rendererDir, dataDir });
    const profile = path.join(tmp, 'chromium-profile');
    context = await chromium.launchPersistentContext(profile, {
      executablePath: CHROMIUM, headless: true, args: CHROMIUM_ARGS, viewport: { width: 1360, height: 860 }, colorScheme: 'light',
    });
    page = context.pages()[0] ?? (await context.newPage());
    // Any blocked script/eval (CSP), uncaught error or console error fails the run at the end.
    await page.addInitScript(() => {
      document.addEventListener('securitypolicyviolation', (e) => console.error(`CSP violation: ${e.violatedDirective} ${e.blockedURI}`));
    });
    page.on('console', (m) => { if (m.type() === 'error') problems.push(m.text()); });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  });

  // A failed step leaves a picture of the page behind, for whoever reads the CI log.
  afterEach(async (ctx) => {
    if (ctx.task.result?.state === 'fail' && page) await shot(`failed-${ctx.task.name.slice(0, 40).replace(/[^a-z0-9]+/gi, '-')}`).catch(() => {});
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
  });

  it('opens on the desk, and a mistyped model path names the file at fault', async () => {
    await page.goto(server.url);
    await page.getByRole('heading', { name: /more than one thing/ }).waitFor();
    const missing = path.join(sampleDataDir(), 'no-such-model.onnx');
    await page.locator('[data-field="model"] input').fill(missing);
    const note = page.locator('[data-field="model"] [role="alert"]');
    await note.waitFor();
    expect(await note.textContent()).toContain(missing);
    await shot('desk-light');
    await page.locator('[data-field="model"] input').fill('');
  });

  it('chooses a probe set in the file browser, confined to the folders Skein may use', async () => {
    await page.locator('[data-field="probes"] button', { hasText: 'Browse' }).click();
    const browser = page.locator('[data-file-browser]');
    await browser.waitFor();
    await browser.locator('select').selectOption(sampleDataDir());
    const tiles = browser.locator('[data-entry]', { hasText: 'tiles' }).filter({ hasText: 'probe set' });
    await tiles.waitFor();
    await shot('file-browser-light');
    await tiles.getByRole('button', { name: 'Choose' }).click();
    await page.locator('[data-field="probes"][data-status="ok"]').waitFor();
    expect(await page.locator('[data-field="probes"] input').inputValue()).toBe(path.join(sampleDataDir(), 'tiles'));
    expect(await page.locator('[data-field="probes"]').textContent()).toContain('1,200 probes');
    await page.locator('[data-field="probes"] input').fill('');
  });

  it('opens the demo and scans it, showing progress until the roster appears', async () => {
    await page.locator('[data-open-demo]').click();
    await page.getByRole('heading', { name: 'Capture' }).waitFor();
    await page.locator('[data-tensors] tbody tr').first().waitFor();
    // Defaults are preselected: exactly the tensors core/model marks as scanned by default, before the user touches anything.
    const info = await createApi()['model.layers']({ model: path.join(sampleDataDir(), 'tiles-model.onnx') });
    const defaults = info.tensors.filter((t) => t.isDefault && t.capturable).map((t) => t.name);
    expect(defaults.length).toBeGreaterThanOrEqual(2); // the demo model has a conv and a dense stage (sample-data/README.md)
    expect(await page.locator('[data-tensors] tr:has(input[type="checkbox"]:checked)').evaluateAll((trs) => trs.map((tr) => tr.getAttribute('data-tensor')))).toEqual(defaults);
    await shot('capture-light');
    // Before the scan, the other screens say what to do next and offer the button that does it (no CLI command).
    await page.locator('header nav button', { hasText: 'Strata' }).click();
    await page.locator('[data-scan-first]').waitFor();
    expect(await page.locator('main').textContent()).not.toMatch(/skein scan/);
    await shot('strata-unscanned-light');
    await page.locator('header nav button', { hasText: 'Roster' }).click();
    await page.locator('[data-scan-first]').waitFor();
    await shot('roster-unscanned-light');
    await page.locator('[data-scan-first]').click();
    await page.getByRole('heading', { name: 'Capture' }).waitFor();
    await page.locator('[data-tensors] tr:has(input[type="checkbox"]:checked)').first().waitFor();
    await page.locator('[data-start-scan]').click();
    await page.locator('[data-job-state]').waitFor();
    await page.getByRole('heading', { name: 'Roster' }).waitFor({ timeout: 240_000 });
    await page.locator('[data-row="0"]').waitFor();
  });

  it('reviews right after the scan, with no reload: the name is asked once, a dismissed prompt keeps the tag, focus comes back', async () => {
    // The review was read when the scan handed over to the roster (it used to wait for a reload).
    await page.locator('[data-reviewer]', { hasText: 'set your reviewer name' }).waitFor();
    await page.locator('[data-row="0"] .layer').click();
    await page.keyboard.press('t');
    const tagInput = page.locator('[data-review-dock] [data-tag-input]');
    await tagInput.waitFor();
    const focusedIs = (attr: string) => page.evaluate((a) => document.activeElement?.hasAttribute(a) ?? false, attr);
    await expect.poll(() => focusedIs('data-tag-input')).toBe(true);
    await page.keyboard.type('first-look');
    await page.keyboard.press('Enter');
    await page.locator('[data-reviewer-dialog]').waitFor();
    await shot('review-after-scan-name-light');
    // Dismissed: the tag is still in its box and the keyboard is back in it.
    await page.keyboard.press('Escape');
    await page.locator('[data-reviewer-dialog]').waitFor({ state: 'detached' });
    expect(await tagInput.inputValue()).toBe('first-look');
    await expect.poll(() => focusedIs('data-tag-input')).toBe(true);
    await page.keyboard.press('Enter');
    await page.locator('[data-reviewer-dialog]').waitFor();
    await page.keyboard.type('Ada');
    await page.keyboard.press('Enter');
    await page.locator('[data-reviewer]', { hasText: 'reviewing as Ada' }).waitFor();
    await page.locator('[data-row="0"] [data-row-tag="first-look"]').waitFor();
    // The next keys after the dialog are text: m, u and n would open Merge, the roster and the note as shortcuts.
    await expect.poll(() => focusedIs('data-tag-input')).toBe(true);
    await page.keyboard.type('mun');
    expect(await tagInput.inputValue()).toBe('mun');
    expect(page.url()).toContain('#/roster');
    await tagInput.fill('');
    await page.keyboard.press('Escape');
    await page.locator('[data-review-dock]').waitFor({ state: 'detached' });
    // A note typed next is saved whole, signed with the saved name: no second prompt.
    await page.keyboard.press('n');
    await expect.poll(() => focusedIs('data-note-input')).toBe(true);
    await page.keyboard.type('mixed: answers to amber and to bar, unlike its neighbours');
    await page.keyboard.press('Control+Enter');
    await page.locator('[data-review-dock] [data-note-html]', { hasText: 'answers to amber and to bar, unlike its neighbours' }).waitFor();
    expect(await page.locator('[data-reviewer-dialog]').count()).toBe(0);
    expect(page.url()).toContain('#/roster');
    await shot('review-after-scan-light');
    await page.keyboard.press('Escape');
    await page.locator('[data-review-dock]').waitFor({ state: 'detached' });
  });

  it('lists units ranked, and sorts by a column', async () => {
    const total = Number(await page.locator('[data-row-count]').getAttribute('data-row-count'));
    expect(total).toBeGreaterThan(10);
    const top = await page.locator('[data-row="0"]').getAttribute('data-unit');
    await shot('roster-light');
    await page.locator('[data-sort="concepts"]').click();
    const values = (await page.locator('.body .row .concepts .num').allTextContents()).map(Number).filter((v) => !Number.isNaN(v));
    expect(values.length).toBeGreaterThan(5);
    for (let i = 1; i < values.length; i++) expect(values[i - 1]).toBeGreaterThanOrEqual(values[i]);
    await page.locator('[data-sort="rank"]').click();
    expect(await page.locator('[data-row="0"]').getAttribute('data-unit')).toBe(top);
  });

  it('opens the top unit with its charts drawn by plotly', async () => {
    await page.locator('[data-row="0"] .layer').click();
    const unit = (await page.locator('[data-row="0"]').getAttribute('data-unit'))!;
    await page.keyboard.press('Enter');
    await page.locator('[data-unit-title]').waitFor();
    expect(await page.locator('[data-unit-title]').textContent()).toBe(unit.replace(/:(\d+)$/, ' · $1'));
    await page.locator('[data-plot="spread"] path.js-line').first().waitFor({ state: 'attached' });
    expect(await page.locator('[data-plot="spread"] path.js-line').count()).toBeGreaterThan(1);
    await page.locator('[data-panel="kin"] table, [data-panel="kin"] p').first().waitFor();
    expect(await page.locator('[data-caution]').count()).toBeGreaterThan(0);
    await shot('profile-light');
  });

  it('opens the most mixed unit: mixture bars, thumbnails and their peak boxes', async () => {
    await page.keyboard.press('Escape');
    await page.getByRole('heading', { name: 'Roster' }).waitFor();
    await mostMixedFirst();
    await page.locator('[data-row="0"] .layer').dblclick();
    await page.locator('[data-unit-title]').waitFor();
    await page.locator('[data-plot="mixture"] .bars path').first().waitFor({ state: 'attached' });
    expect(await page.locator('[data-plot="mixture"] .bars path').count()).toBeGreaterThan(1);
    await page.locator('[data-panel="top-probes"] img').first().waitFor(); // the demo's probes are images
    await shot('profile-mixed-light');
  });

  it('marks where a conv unit peaked on each thumbnail', async () => {
    await page.keyboard.press('Escape');
    await page.locator('[data-search]').fill('conv');
    await page.locator('[data-row="0"] .layer').dblclick();
    await page.locator('[data-unit-title][data-layer-kind="conv"]').waitFor();
    await page.locator('[data-panel="top-probes"] img').first().waitFor();
    // One box per thumbnail, each one grid cell of the layer's H×W map.
    expect(await page.locator('[data-panel="top-probes"] .box').count()).toBe(await page.locator('[data-panel="top-probes"] figure.image').count());
    await shot('profile-conv-light');
    await page.keyboard.press('Escape');
    await page.locator('[data-search]').fill('');
    await mostMixedFirst();
    await page.locator('[data-row="0"] .layer').dblclick();
    await page.locator('[data-plot="mixture"] .bars path').first().waitFor({ state: 'attached' });
    await page.locator('[data-theme-toggle]').click();
    expect(await page.evaluate(() => document.documentElement.dataset.theme)).toBe('dark');
    await page.locator('[data-plot="spread"] path.js-line').first().waitFor({ state: 'attached' });
    await shot('profile-mixed-dark');
  });

  it('filters the roster to the units one label drives', async () => {
    const label = (await page.locator('[data-panel="drivers"] tbody .chip').first().textContent())!.trim();
    await page.keyboard.press('Escape');
    await page.getByRole('heading', { name: 'Roster' }).waitFor();
    await page.locator('[data-kind="any"]').click();
    await page.locator('[data-driver-filter]').fill(label);
    await page.locator('[data-driver-filter]').blur();
    await page.locator(`.body .row .chip.active`).first().waitFor();
    const rows = await page.locator('.body .row').count();
    // Exactly the units the API says the label drives (the demo has few enough that every row is rendered).
    const reach = await createApi({ dataDir: path.join(tmp, 'home') })['concept.units']({ study: path.join(tmp, 'home', 'demo.study'), label });
    expect(reach.driverOf).toBeLessThan(40);
    expect(Number(await page.locator('[data-row-count]').getAttribute('data-row-count'))).toBe(reach.driverOf);
    expect(rows).toBe(reach.driverOf);
    expect(await page.locator('.body .row:has(.chip.active)').count()).toBe(rows);
    await shot('roster-filtered-dark');
  });

  it('moves with j/k, searches with / and opens with Enter', async () => {
    await page.locator('.filters .link').click(); // clear the filters
    await page.locator('[data-row="2"]').waitFor();
    await page.locator('h1').first().click();
    await page.keyboard.press('g');
    await page.keyboard.press('j');
    await page.keyboard.press('j');
    await page.keyboard.press('k');
    await expect.poll(() => page.locator('.body .row.cursor').getAttribute('data-row')).toBe('1');
    await page.keyboard.press('/');
    expect(await page.evaluate(() => document.activeElement?.hasAttribute('data-search'))).toBe(true);
    const unit = (await page.locator('[data-row="1"]').getAttribute('data-unit'))!;
    const layerName = unit.slice(0, unit.lastIndexOf(':'));
    await page.keyboard.type(layerName);
    await page.keyboard.press('Escape');
    expect(await page.evaluate(() => document.activeElement?.hasAttribute('data-search'))).toBe(false);
    await page.locator('[data-row="0"]').waitFor();
    const shown = await page.locator('.body .row').evaluateAll((els) => els.map((e) => e.getAttribute('data-unit')!));
    expect(shown.every((u) => u.includes(layerName))).toBe(true);
    await page.keyboard.press('j');
    const target = (await page.locator('.body .row.cursor').getAttribute('data-unit'))!;
    await page.keyboard.press('Enter');
    await page.locator('[data-unit-title]').waitFor();
    expect(await page.locator('[data-unit-title]').textContent()).toBe(target.replace(/:(\d+)$/, ' · $1'));
  });

  it('keeps the study and the screen across a reload', async () => {
    const title = await page.locator('[data-unit-title]').textContent();
    await page.reload();
    await page.locator('[data-unit-title]').waitFor();
    expect(await page.locator('[data-unit-title]').textContent()).toBe(title);
    expect(await page.locator('[data-study-name]').textContent()).toBe('demo.study');
    await page.keyboard.press('u');
    await page.locator('[data-row="0"]').waitFor();
  });

  it('shows the layer overview and one label’s reach', async () => {
    await page.keyboard.press('l');
    await page.getByRole('heading', { name: 'Strata' }).waitFor();
    await page.locator('[data-plot="layer-kinds"] .bars path').first().waitFor({ state: 'attached' });
    // The table shows, per layer, the unit count and the mixed count core classified (layers.strata of the demo study).
    const api = createApi({ dataDir: path.join(tmp, 'home') });
    const demo = path.join(tmp, 'home', 'demo.study');
    const overview = await api['layers.strata']({ study: demo });
    const shown = await page.locator('[data-strata-table] tbody tr').evaluateAll((trs) => trs.map((tr) => {
      const cells = [...tr.querySelectorAll('td')].map((td) => td.textContent!.trim());
      return { name: cells[0], units: Number(cells[2].replace(/,/g, '')), mixed: Number(tr.querySelector('td.mixed .muted')!.textContent!.replace(/,/g, '')) };
    }));
    expect(shown).toEqual(overview.layers.map((l) => ({ name: l.name, units: l.units, mixed: l.mixed })));
    await shot('strata-dark');
    await page.locator('[data-theme-toggle]').click();
    await shot('strata-light');
    await page.keyboard.press('c');
    await page.locator('[data-label-list] tbody tr').first().waitFor();
    await shot('reach-list-light');
    const firstLabel = (await page.locator('[data-label-list] tbody tr').first().locator('td').first().textContent())!.trim();
    await page.locator('[data-label-list] tbody tr').first().click();
    await page.locator('[data-driver-of]').waitFor();
    // The label's reach as the API computes it: units it drives, of all scored units.
    const reach = await api['concept.units']({ study: demo, label: firstLabel });
    expect((await page.locator('[data-driver-of]').textContent())!.replace(/,/g, '').replace(/\s+/g, ' ').trim()).toBe(`${reach.driverOf} of ${reach.totalUnits}`);
    await page.locator('[data-plot="auroc-histogram"] .bars path').first().waitFor({ state: 'attached' });
    await shot('reach-light');
  });

  it('stops a scan on cancel and resumes it from the saved chunks, showing progress', async () => {
    await page.goto(`${server.origin}/#/capture?${new URLSearchParams({ study: slow.study, model: slow.model, probes: slow.probes })}`);
    await page.locator('[data-tensor="deep"] input').check();
    await page.locator('[data-tensor="shallow"] input').uncheck();
    // One probe per batch and two per chunk: the scan saves a chunk every second probe and checks for a stop after each.
    await page.locator('[data-batch]').fill('1');
    await page.locator('[data-chunk-size]').fill('2');
    await page.locator('[data-start-scan]').click();
    // Three probes done means the first chunk is saved; stop then, early, so the stop lands while the scan runs.
    await page.waitForFunction(() => Number(document.querySelector('[role="progressbar"]')?.getAttribute('aria-valuenow')) >= 3, undefined, { timeout: 120_000 });
    await page.locator('[data-cancel-scan]').click();
    await page.locator('[data-job-state="cancelled"]').waitFor({ timeout: 120_000 });
    expect(await page.locator('[data-job-state]').textContent()).toContain('Scan again to continue');
    await shot('capture-cancelled-light');
    await page.locator('[data-start-scan]').click();
    await page.locator('[data-job-note]', { hasText: /Resuming: \d+ of 1000 chunks/ }).waitFor({ timeout: 120_000 });
    await shot('capture-resuming-light');
    await page.getByRole('heading', { name: 'Roster' }).waitFor({ timeout: 240_000 });
  }, 300_000);

  it('keeps 10^5 units in a window of a few dozen rows, and reaches the last one by keyboard', async () => {
    await page.evaluate((hash) => { location.hash = hash; }, `#/roster?study=${encodeURIComponent(wide.study)}`);
    await page.locator('[data-study-name]', { hasText: 'wide.study' }).waitFor();
    await page.locator('[role="grid"][aria-rowcount="100000"] [data-row="0"]').waitFor({ timeout: 120_000 });
    const rendered = await page.locator('.body .row').count();
    expect(rendered).toBeGreaterThan(10);
    expect(rendered).toBeLessThan(120);
    await page.locator('h1').first().click();
    await page.keyboard.press('G');
    await page.locator('[data-row="99999"].cursor').waitFor();
    expect(await page.locator('.body .row').count()).toBeLessThan(120);
    await page.keyboard.press('k');
    await page.locator('[data-row="99998"].cursor').waitFor();
    await shot('roster-100k-end-light');
    await page.keyboard.press('/');
    await page.keyboard.type('#99999');
    await page.keyboard.press('Enter');
    await expect.poll(() => page.locator('.body .row').count()).toBe(1);
    expect(await page.locator('[data-row="0"]').getAttribute('data-unit')).toBe('h:99999');
  });

  it('lists the studies opened so far on the desk, in the dark theme', async () => {
    await page.locator('[data-theme-toggle]').click();
    expect(await page.evaluate(() => document.documentElement.dataset.theme)).toBe('dark');
    await page.locator('header .mark').click();
    await page.getByRole('heading', { name: /more than one thing/ }).waitFor();
    const recent = await page.locator('.recents li').allTextContents();
    for (const name of ['wide.study', 'slow.study', 'demo.study']) expect(recent.some((r) => r.includes(name))).toBe(true);
    expect(recent[0]).toContain('wide.study'); // newest first
    await shot('desk-dark');
  });

  it('ran without a console error or a blocked script (plotly under script-src self)', () => {
    expect(problems.slice(0, 20)).toEqual([]);
  });
});
