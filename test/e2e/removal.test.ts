/**
 * What removing a unit costs, in real Chromium against browser mode (real server, onnxruntime, SQLite), on the demo:
 * a mixed unit of the wide layer is checked from its page (x) and the page says whether the causal side agrees with
 * its drivers; the Toll screen ablates every unit of the narrow layer (r) and ranks them; the roster sorts by it.
 * Expected labels come from the CLI-independent construction in test/intervene/ablate.test.ts; here the screens are
 * checked to show exactly what the API stored. Screenshots, light and dark, go to test-output/screenshots/.
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
import { runScan, createApi } from '../../core/api/index.ts';

const repo = fileURLToPath(new URL('../../', import.meta.url));
const shots = path.join(repo, 'test-output', 'screenshots');
const CHROMIUM = '/usr/bin/chromium';
const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];

describe('Removal cost in Chromium (browser mode)', () => {
  let tmp: string;
  let server: RunningServer;
  let context: BrowserContext;
  let page: Page;
  const problems: string[] = [];
  let demo: string;

  const shot = (name: string) => page.screenshot({ path: path.join(shots, `${name}.png`), fullPage: false });
  const open = (hash: string) => page.evaluate((h) => { location.hash = h; }, hash);
  const setTheme = async (want: 'light' | 'dark') => {
    if ((await page.evaluate(() => document.documentElement.dataset.theme)) !== want) await page.locator('[data-theme-toggle]').click();
  };

  beforeAll(async () => {
    tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-e2e-removal-'));
    fs.mkdirSync(shots, { recursive: true });
    const rendererDir = path.join(tmp, 'renderer');
    await build({ configFile: path.join(repo, 'app/renderer/vite.config.ts'), logLevel: 'error', build: { outDir: rendererDir, emptyOutDir: true } });
    const home = path.join(tmp, 'home');
    fs.mkdirSync(home);
    demo = path.join(home, 'demo.study');
    await runScan({ model: path.join(sampleDataDir(), 'tiles-model.onnx'), probes: path.join(sampleDataDir(), 'tiles'), study: demo });
    server = await startServer({ port: 0, roots: [sampleDataDir(), home], rendererDir, dataDir: home });
    context = await chromium.launchPersistentContext(path.join(tmp, 'chromium-profile'), {
      executablePath: CHROMIUM, headless: true, args: CHROMIUM_ARGS, viewport: { width: 1360, height: 900 }, colorScheme: 'light',
    });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('console', (m) => { if (m.type() === 'error') problems.push(m.text()); });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
    await page.goto(server.url);
  }, 240_000);

  afterEach(async (ctx) => {
    if (ctx.task.result?.state === 'fail' && page) await shot(`failed-removal-${ctx.task.name.slice(0, 40).replace(/[^a-z0-9]+/gi, '-')}`).catch(() => {});
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
  });

  it('checks a mixed unit from its page: hurt labels, the agree / disagree sentence, the caution line', async () => {
    // The demo's most mixed unit of the wide layer, as the study ranks it.
    const rows = await createApi()['study.rank']({ study: demo, layer: 'relu_wide' });
    const mixed = rows.find((r) => r.drivers.length >= 2)!;
    await open(`#/profile?${new URLSearchParams({ study: demo, layer: 'relu_wide', unit: String(mixed.unit) })}`);
    const panel = page.locator('[data-panel="removal"]');
    await panel.locator('[data-empty]').waitFor();
    await page.locator('[data-unit-title]').click();
    await page.keyboard.press('x');
    await panel.locator('[data-removal-headline]').waitFor({ timeout: 60_000 });
    const stored = (await createApi()['ablate.cached']({ study: demo, layer: 'relu_wide', unit: mixed.unit }))!;
    expect(stored.cost.hurt.length).toBeGreaterThan(0);
    const hurtText = await panel.locator('[data-hurt]').textContent();
    for (const l of stored.cost.hurt) expect(hurtText).toContain(l);
    expect(await panel.locator('[data-agreement]').getAttribute('data-agreement')).toBe(stored.comparison.agreement);
    expect(await panel.locator('[data-agreement]').textContent()).toContain(stored.comparison.sentence);
    expect(await panel.locator('[data-caution]').textContent()).toContain('not proof');
    await panel.scrollIntoViewIfNeeded();
    await shot('removal-unit-light');
    await setTheme('dark');
    await shot('removal-unit-dark');
    await setTheme('light');
  }, 120_000);

  it('Toll ablates every unit of the narrow layer with progress, ranks them, and the roster sorts by it', async () => {
    await open(`#/toll?${new URLSearchParams({ study: demo, layer: 'relu_narrow' })}`);
    await page.locator('[data-toll-run]').waitFor();
    await page.locator('h1').click();
    await page.keyboard.press('r');
    await expect.poll(() => page.locator('[data-toll-table] tr[data-toll-unit]').count(), { timeout: 60_000 }).toBe(5);
    const view = await createApi()['ablate.layer']({ study: demo, layer: 'relu_narrow' });
    const shown = await page.locator('[data-toll-table] tr[data-toll-unit]').evaluateAll((els) => els.map((e) => Number(e.getAttribute('data-toll-unit'))));
    expect(shown).toEqual(view.rows.map((r) => r.unit));
    for (let i = 1; i < view.rows.length; i++) expect(view.rows[i - 1].conceptsHurt).toBeGreaterThanOrEqual(view.rows[i].conceptsHurt);
    await shot('toll-light');
    await setTheme('dark');
    await shot('toll-dark');
    await setTheme('light');

    await open(`#/roster?${new URLSearchParams({ study: demo })}`);
    await page.locator('[data-sort="hurt"]').click();
    await expect.poll(() => page.locator('[data-row="0"] [data-hurt-cell]').textContent()).toBe(view.rows[0].conceptsHurt.toFixed(2));
    expect(await page.locator('[data-row="0"]').getAttribute('data-unit')).toBe(`relu_narrow:${view.rows[0].unit}`);
    await shot('roster-hurt-light');
    expect(problems).toEqual([]);
  }, 120_000);
});
