/**
 * The Lens view in real Chromium against browser mode (real server, onnxruntime, SQLite) on the demo: the narrow
 * layer's summary, directions, interference and localisation drawn; picking a concept lists the units it leans on;
 * a unit's profile shows the directions its axis sits between, or says how to measure them. Screenshots light and
 * dark under test-output/screenshots/. Assertions wait for states, never for durations.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { build } from 'vite';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { startServer, type RunningServer } from '../../app/server/index.ts';
import { runScan } from '../../core/api/index.ts';
import { demoPaths } from '../../core/cli/main.ts';

const repo = fileURLToPath(new URL('../../', import.meta.url));
const shots = path.join(repo, 'test-output', 'screenshots');
const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];

describe('Lens view in Chromium', () => {
  let tmp: string;
  let study: string;
  let server: RunningServer;
  let context: BrowserContext;
  let page: Page;
  const problems: string[] = [];
  const shot = (name: string) => page.screenshot({ path: path.join(shots, `${name}.png`), fullPage: false });
  const setTheme = async (want: 'light' | 'dark') => {
    if ((await page.evaluate(() => document.documentElement.dataset.theme)) !== want) await page.locator('[data-theme-toggle]').click();
  };

  beforeAll(async () => {
    tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-e2e-lens-'));
    fs.mkdirSync(shots, { recursive: true });
    const rendererDir = path.join(tmp, 'renderer');
    await build({ configFile: path.join(repo, 'app/renderer/vite.config.ts'), logLevel: 'error', build: { outDir: rendererDir, emptyOutDir: true } });
    study = path.join(tmp, 'data', 'demo.study');
    await runScan({ ...demoPaths, study, layers: ['relu_narrow', 'relu_wide'] });
    const dataDir = path.join(tmp, 'home');
    fs.mkdirSync(dataDir);
    server = await startServer({ port: 0, roots: [path.join(tmp, 'data'), dataDir], rendererDir, dataDir });
    context = await chromium.launchPersistentContext(path.join(tmp, 'profile'), {
      executablePath: '/usr/bin/chromium', headless: true, args: CHROMIUM_ARGS, viewport: { width: 1360, height: 900 }, colorScheme: 'light',
    });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('console', (m) => { if (m.type() === 'error') problems.push(m.text()); });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
    await page.goto(server.url);
  }, 180_000);

  afterEach(async (ctx) => {
    if (ctx.task.result?.state === 'fail' && page) await shot(`failed-lens-${ctx.task.name.slice(0, 40).replace(/[^a-z0-9]+/gi, '-')}`).catch(() => {});
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
  });

  it('a unit profile says the lens is not measured yet and leads to it', async () => {
    await page.goto(`${server.origin}/#/profile?${new URLSearchParams({ study, layer: 'relu_narrow', unit: '0' })}`);
    await page.locator('[data-open-lens]').waitFor();
    await setTheme('light');
    await page.locator('[data-panel="loadings"]').scrollIntoViewIfNeeded();
    await shot('lens-profile-unmeasured-light');
    await page.locator('[data-open-lens]').click();
    await page.locator('[data-lens-summary]').waitFor({ timeout: 120_000 });
    expect(await page.locator('[data-lens-layer]').inputValue()).toBe('relu_narrow');
  }, 180_000);

  it('shows the narrow layer packing more concepts than units, with interference, in light and dark', async () => {
    const sentence = await page.locator('[data-lens-sentence]').textContent();
    expect(sentence).toMatch(/^5 units, about [\d.]+ effective dimensions, \d+ decodable concepts: [\d.]+ per dimension\./);
    const decodable = Number(/(\d+) decodable/.exec(sentence!)![1]);
    expect(decodable).toBeGreaterThan(5);
    expect(await page.locator('[data-lens-caution]').textContent()).toMatch(/not proof/);
    expect(await page.locator('[data-lens-projection]').textContent()).toMatch(/top two principal axes.*keeps \d+ %|keeps \d+%/);
    await page.locator('[data-plot="lens-directions"] .scatterlayer .trace').first().waitFor({ state: 'attached' });
    await page.locator('[data-plot="lens-interference"] .hm, [data-plot="lens-interference"] image').first().waitFor({ state: 'attached' });
    await page.locator('[data-plot="lens-localisation"] .scatterlayer .trace').first().waitFor({ state: 'attached' });
    await page.keyboard.press('j');
    await page.locator('[data-lens-leans]').waitFor();
    await shot('lens-light');
    await setTheme('dark');
    await page.locator('[data-plot="lens-directions"] .scatterlayer .trace').first().waitFor({ state: 'attached' });
    await shot('lens-dark');
  }, 60_000);

  it('opens a unit the concept leans on, whose profile shows the directions it sits between', async () => {
    const unit = await page.locator('[data-lean-unit]').first().getAttribute('data-lean-unit');
    await page.locator('[data-lean-unit]').first().click();
    await page.locator('[data-unit-title]').waitFor();
    expect(await page.locator('[data-unit-title]').textContent()).toContain(unit!);
    await page.locator('[data-panel="loadings"] [data-loading]').first().waitFor();
    expect(await page.locator('[data-panel="loadings"] [data-loading]').count()).toBeGreaterThan(1);
    await page.locator('[data-panel="loadings"]').scrollIntoViewIfNeeded();
    await shot('lens-profile-loadings-dark');
    await setTheme('light');
    await shot('lens-profile-loadings-light');
  }, 60_000);

  it('switches layers from the tab key and the layer list', async () => {
    await page.keyboard.press('i');
    await page.locator('[data-lens-summary]').waitFor();
    await page.locator('[data-lens-layer]').selectOption('relu_wide');
    await page.waitForFunction(() => document.querySelector('[data-lens-sentence]')?.textContent?.startsWith('32 units'), undefined, { timeout: 120_000 });
    await page.locator('[data-plot="lens-interference"]').waitFor();
    await shot('lens-wide-light');
  }, 180_000);

  it('ran without a console error', () => {
    expect(problems).toEqual([]);
  });
});
