/**
 * The unit page's evidence in real Chromium against browser mode (real server, real onnxruntime, real SQLite):
 * the response table of a planted unit, ReLU(blue + square + tiny noise) (test/support/fixtures.ts), shows the counts
 * computed here independently from the probe set's own label lists (not from anything Skein stored) and the effects
 * known by construction (+1 alone, +2 together); its example strips hold probes of the driver alone; the review
 * panel follows the evidence and folds away. Then the demo's top unit, light and dark, saved under
 * test-output/screenshots/. Assertions wait for states, never for durations.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { build } from 'vite';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import Database from 'better-sqlite3';
import { startServer, type RunningServer } from '../../app/server/index.ts';
import { sampleDataDir } from '../../core/api/files.ts';
import { runScan, createApi } from '../../core/api/index.ts';
import { PLANTED_UNITS, plantedProbes, writePlanted } from '../support/fixtures.ts';

const repo = fileURLToPath(new URL('../../', import.meta.url));
const shots = path.join(repo, 'test-output', 'screenshots');
const CHROMIUM = '/usr/bin/chromium';
const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];
const PROBES = 3000;
const SEED = 9;

describe('Unit evidence in Chromium (browser mode)', () => {
  let tmp: string;
  let server: RunningServer;
  let context: BrowserContext;
  let page: Page;
  const problems: string[] = [];
  let planted: string;
  let demo: string;

  const shot = (name: string) => page.screenshot({ path: path.join(shots, `${name}.png`), fullPage: false });
  const open = (hash: string) => page.evaluate((h) => { location.hash = h; }, hash);
  const profile = (study: string, layer: string, unit: number) => `#/profile?${new URLSearchParams({ study, layer, unit: String(unit) })}`;
  const setTheme = async (want: 'light' | 'dark') => {
    if ((await page.evaluate(() => document.documentElement.dataset.theme)) !== want) await page.locator('[data-theme-toggle]').click();
  };
  const cell = (driver: string, name: string) => page.locator(`[data-response-table] tr[data-driver="${driver}"] [data-cell="${name}"]`).textContent();

  beforeAll(async () => {
    tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-e2e-evidence-'));
    fs.mkdirSync(shots, { recursive: true });
    const rendererDir = path.join(tmp, 'renderer');
    await build({ configFile: path.join(repo, 'app/renderer/vite.config.ts'), logLevel: 'error', build: { outDir: rendererDir, emptyOutDir: true } });
    const home = path.join(tmp, 'home');
    fs.mkdirSync(home);
    const w = writePlanted(home, PROBES, SEED);
    planted = path.join(home, 'planted.study');
    demo = path.join(home, 'demo.study');
    // The scans are not what is tested here (app.test.ts scans through the screens).
    await runScan({ model: w.model, probes: w.probes, study: planted, layers: ['planted'], batch: 300 });
    await runScan({ model: path.join(sampleDataDir(), 'tiles-model.onnx'), probes: path.join(sampleDataDir(), 'tiles'), study: demo });
    server = await startServer({ port: 0, roots: [sampleDataDir(), home], rendererDir, dataDir: home });
    context = await chromium.launchPersistentContext(path.join(tmp, 'chromium-profile'), {
      executablePath: CHROMIUM, headless: true, args: CHROMIUM_ARGS, viewport: { width: 1360, height: 860 }, colorScheme: 'light',
    });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('console', (m) => { if (m.type() === 'error') problems.push(m.text()); });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  }, 240_000);

  afterEach(async (ctx) => {
    if (ctx.task.result?.state === 'fail' && page) await shot(`failed-evidence-${ctx.task.name.slice(0, 40).replace(/[^a-z0-9]+/gi, '-')}`).catch(() => {});
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
  });

  it('shows the planted unit\'s response table with the independently counted probes and the built-in effects', async () => {
    const unit = PLANTED_UNITS.findIndex((u) => u.name === 'blue+square');
    // Independent count: the fixture's own label lists (same seed), not the study file.
    const { labels } = plantedProbes(PROBES, SEED);
    const has = (p: number, l: string) => labels[p].includes(l);
    let blueOnly = 0, squareOnly = 0, both = 0, none = 0;
    for (let p = 0; p < PROBES; p++) {
      const b = has(p, 'blue'), s = has(p, 'square');
      if (b && s) both++; else if (b) blueOnly++; else if (s) squareOnly++; else none++;
    }
    await page.goto(server.url);
    await open(profile(planted, 'planted', unit));
    await page.locator('[data-response-table] tr[data-driver="blue"]').waitFor();
    expect(await cell('blue', 'alone-n')).toBe(blueOnly.toLocaleString('en-US'));
    expect(await cell('square', 'alone-n')).toBe(squareOnly.toLocaleString('en-US'));
    expect(await cell('blue', 'with-n')).toBe(both.toLocaleString('en-US'));
    expect(await page.locator('[data-response-table] [data-cell="none-n"]').textContent()).toBe(none.toLocaleString('en-US'));
    // By construction: weight 1 per driver, noise < 0.0015 → +1.000 alone (or +1.001), three decimals shown.
    expect(await cell('blue', 'alone-effect')).toMatch(/^\+1\.00[01]$/);
    expect(await cell('square', 'alone-effect')).toMatch(/^\+1\.00[01]$/);
    // The formula is stated on the page.
    expect(await page.locator('[data-formulas]').textContent()).toContain('mean of the probes with none of the drivers');
    // Strips: eight probes of blue without square, highest first.
    const strip = page.locator('[data-strip="blue"] figure');
    expect(await strip.count()).toBe(8);
    for (const labels of await strip.locator('[data-labels]').evaluateAll((els) => els.map((e) => e.getAttribute('data-labels')!))) {
      expect(labels.split(',')).toContain('blue');
      expect(labels.split(',')).not.toContain('square');
    }
    // Why it ranks there, from the stored ranking.
    const rows = await createApi()['study.rank']({ study: planted });
    const rank = rows.findIndex((r) => r.unit === unit);
    expect(await page.locator('[data-rank-reason]').textContent()).toContain(`Ranked ${rank + 1} of ${PLANTED_UNITS.length}`);
    await page.locator('[data-caution]').first().waitFor();
    await shot('evidence-planted-light');
  });

  it('puts the review panel after the evidence, folds it, remembers that, and opens it again on t', async () => {
    const order = await page.evaluate(() => {
      const ev = document.querySelector('[data-panel="evidence"]')!;
      const review = document.querySelector('[data-panel="review"]')!;
      return ev.compareDocumentPosition(review) & Node.DOCUMENT_POSITION_FOLLOWING;
    });
    expect(order).toBeTruthy();
    const review = page.locator('details[data-panel="review"]');
    expect(await review.getAttribute('open')).not.toBeNull();
    await review.locator('summary').click();
    await expect.poll(() => review.getAttribute('open')).toBeNull();
    // Another unit: still folded.
    await open(profile(planted, 'planted', PLANTED_UNITS.findIndex((u) => u.name === 'mono-star')));
    await page.locator('[data-response-table] tr[data-driver="star"]').waitFor();
    expect(await page.locator('details[data-panel="review"]').getAttribute('open')).toBeNull();
    await page.locator('[data-unit-title]').click();
    await page.keyboard.press('t');
    await expect.poll(() => page.locator('details[data-panel="review"]').getAttribute('open')).not.toBeNull();
  });

  it('weighs a driver list the user types: the either-or unit red | orange, known by construction', async () => {
    const unit = PLANTED_UNITS.findIndex((u) => u.name === 'red+orange');
    const { labels } = plantedProbes(PROBES, SEED);
    const orangeOnly = labels.filter((ls) => ls.includes('orange')).length; // one hue per probe: never with red
    await open(profile(planted, 'planted', unit));
    await page.locator('[data-response-table]').waitFor();
    await page.locator('[data-unit-title]').click();
    await page.keyboard.press('w');
    expect(await page.evaluate(() => document.activeElement?.hasAttribute('data-weigh-input'))).toBe(true);
    await page.locator('[data-weigh-input]').fill('red, mauve');
    await page.locator('[data-weigh] button[type="submit"]').click();
    expect(await page.locator('[data-weigh] [role="alert"]').textContent()).toBe('No label "mauve" in this study.');
    await page.locator('[data-weigh-input]').fill('red, orange');
    await page.locator('[data-weigh-input]').press('Enter');
    await page.locator('[data-response-table] tr[data-driver="orange"]').waitFor();
    expect(await cell('orange', 'alone-n')).toBe(orangeOnly.toLocaleString('en-US'));
    expect(await cell('orange', 'with-n')).toBe('0');
    expect(await cell('orange', 'alone-effect')).toMatch(/^\+1\.00[01]$/);
    expect(await cell('red', 'alone-effect')).toMatch(/^\+1\.00[01]$/);
    await shot('evidence-weigh-light');
    await page.locator('[data-weigh-reset]').click();
    await page.locator('[data-weigh-reset]').waitFor({ state: 'detached' });
    await page.locator('[data-response-table]').waitFor();
  });

  it('says so when a unit has no driver, and still shows what it fires on', async () => {
    await open(profile(planted, 'planted', PLANTED_UNITS.findIndex((u) => u.name === 'dead')));
    await page.locator('[data-panel="evidence"] [data-empty]', { hasText: 'No drivers to weigh' }).waitFor();
    expect(await page.locator('[data-rank-reason]').textContent()).toContain('dead');
  });

  it('shows the demo\'s top unit with its evidence, light and dark', async () => {
    const [top] = await createApi()['study.rank']({ study: demo, top: 1 });
    await open(profile(demo, top.layer, top.unit));
    await page.locator('[data-response-table]').waitFor();
    expect(await page.locator('[data-response-table] tbody tr').count()).toBe(top.drivers.length);
    await page.locator('[data-strip] figure img').first().waitFor();
    expect(await page.locator('[data-rank-reason]').textContent()).toContain('Ranked 1 of');
    // Moving straight from one study's unit page to another's (a changed address) shows the new study's review, not an error.
    await page.locator('[data-panel="review"] [data-tag-input]').waitFor();
    expect(await page.locator('[data-panel="review"] [role="alert"]').count()).toBe(0);
    await shot('evidence-demo-light');
    await setTheme('dark');
    await page.locator('[data-response-table]').waitFor();
    await shot('evidence-demo-dark');
    await page.locator('[data-panel="evidence"]').screenshot({ path: path.join(shots, 'evidence-demo-panel-dark.png') });
    await setTheme('light');
    await page.locator('[data-panel="evidence"]').screenshot({ path: path.join(shots, 'evidence-demo-panel-light.png') });
  });

  it('shows the concept count interval in the roster, as the study stores it', async () => {
    await open(`#/roster?study=${encodeURIComponent(demo)}`);
    await page.locator('[data-row="0"] [data-interval]').waitFor();
    // Independent of the screen's reader: the stored columns, read with SQL here.
    const db = new Database(demo, { readonly: true });
    const top = db.prepare(`SELECT concept_count, concept_low, concept_high FROM unit_score ORDER BY rank LIMIT 1`).get() as Record<string, number>;
    db.close();
    expect(await page.locator('[data-row="0"] [data-interval]').textContent()).toBe(`${top.concept_low.toFixed(2)}–${top.concept_high.toFixed(2)}`);
    await shot('roster-interval-light');
  });

  it('shows the shuffled-label baseline beside each layer\'s mixed count', async () => {
    await open(`#/strata?study=${encodeURIComponent(demo)}`);
    await page.locator('[data-strata-table] [data-baseline]').first().waitFor();
    const db = new Database(demo, { readonly: true });
    const nulls = db.prepare(`SELECT l.name, l.units, n.mixed_expected AS expected FROM layer_null n JOIN layer l ON l.id = n.layer_id`).all() as { name: string; units: number; expected: number }[];
    db.close();
    expect(nulls.length).toBeGreaterThan(0);
    for (const n of nulls) {
      const text = await page.locator(`[data-baseline="${n.name}"]`).textContent();
      expect(text).toBe(`${((n.expected / n.units) * 100).toFixed(1)}% ≈${Math.round(n.expected)}`);
    }
    await page.locator('[data-plot="layer-kinds"] .scatterlayer .point').first().waitFor({ state: 'attached' });
    await shot('strata-baseline-light');
    await setTheme('dark');
    await shot('strata-baseline-dark');
    await setTheme('light');
    expect(problems).toEqual([]);
  });
});
