/**
 * Team review as two colleagues meet it, in real Chromium against browser mode (real server, real SQLite) on the demo:
 * set the reviewer name → tag a unit with t → note → status → undo → a colleague's copy of the study gets a
 * different note → a bundle is exported from the first and merged into the copy on the Merge screen → the note
 * conflict is decided on screen and the note shows the decision; an edit beaten by another writer keeps the typed text.
 * Screenshots of each review screen, light and dark, go to test-output/screenshots/. Assertions wait for states.
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
import { runScan } from '../../core/api/index.ts';

const repo = fileURLToPath(new URL('../../', import.meta.url));
const shots = path.join(repo, 'test-output', 'screenshots');
const CHROMIUM = '/usr/bin/chromium';
const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];

describe('Team review in Chromium (browser mode)', () => {
  let tmp: string;
  let home: string;
  let server: RunningServer;
  let context: BrowserContext;
  let page: Page;
  const problems: string[] = [];
  let study: string;
  let copy: string;
  let bundle: string;
  let unit: { layer: string; unit: number };

  const shot = (name: string) => page.screenshot({ path: path.join(shots, `${name}.png`), fullPage: false });
  const open = (hash: string) => page.evaluate((h) => { location.hash = h; }, hash);
  const profileOf = (s: string) => `#/profile?${new URLSearchParams({ study: s, layer: unit.layer, unit: String(unit.unit) })}`;
  /** The same API the page uses, over the same loopback HTTP, as a second writer would reach the study. */
  const api = async (method: string, body: unknown) => {
    const res = await fetch(`${server.origin}/api/${method}`, { method: 'POST', headers: { 'content-type': 'application/json', 'x-skein-token': server.token }, body: JSON.stringify(body) });
    const env = await res.json() as { ok: boolean; value?: any; error?: any };
    if (!env.ok) throw new Error(`${method}: ${env.error?.message}`);
    return env.value;
  };
  const setTheme = async (want: 'light' | 'dark') => {
    if ((await page.evaluate(() => document.documentElement.dataset.theme)) !== want) await page.locator('[data-theme-toggle]').click();
  };
  const setReviewer = async (name: string) => {
    await page.locator('[data-reviewer]').click();
    await page.locator('[data-reviewer-dialog]').waitFor();
    await page.locator('[data-reviewer-name]').fill(name);
    await page.locator('[data-reviewer-dialog] button[type="submit"]').click();
    await page.locator('[data-reviewer]', { hasText: `reviewing as ${name}` }).waitFor();
  };
  const noteShows = (text: string) => page.locator('[data-panel="review"] [data-note-html]', { hasText: text }).waitFor();

  beforeAll(async () => {
    tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-e2e-review-'));
    fs.mkdirSync(shots, { recursive: true });
    const rendererDir = path.join(tmp, 'renderer');
    await build({ configFile: path.join(repo, 'app/renderer/vite.config.ts'), logLevel: 'error', build: { outDir: rendererDir, emptyOutDir: true } });
    home = path.join(tmp, 'home');
    fs.mkdirSync(home);
    study = path.join(home, 'demo.study');
    copy = path.join(home, 'demo-tomas.study');
    bundle = path.join(home, 'rosa.review.json');
    // The scan is not what is tested here (app.test.ts scans through the screens).
    await runScan({ model: path.join(sampleDataDir(), 'tiles-model.onnx'), probes: path.join(sampleDataDir(), 'tiles'), study });
    server = await startServer({ port: 0, roots: [sampleDataDir(), home], rendererDir, dataDir: home });
    context = await chromium.launchPersistentContext(path.join(tmp, 'chromium-profile'), {
      executablePath: CHROMIUM, headless: true, args: CHROMIUM_ARGS, viewport: { width: 1360, height: 860 }, colorScheme: 'light',
    });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('console', (m) => { if (m.type() === 'error') problems.push(m.text()); });
    page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  }, 180_000);

  afterEach(async (ctx) => {
    if (ctx.task.result?.state === 'fail' && page) await shot(`failed-review-${ctx.task.name.slice(0, 40).replace(/[^a-z0-9]+/gi, '-')}`).catch(() => {});
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
  });

  it('asks for the reviewer name once, and keeps it in the preferences', async () => {
    await page.goto(server.url);
    await open(`#/roster?study=${encodeURIComponent(study)}`);
    await page.locator('[data-row="0"]').waitFor();
    await page.locator('[data-reviewer]', { hasText: 'set your reviewer name' }).waitFor();
    await page.locator('[data-reviewer]').click();
    await page.locator('[data-reviewer-dialog]').waitFor();
    await shot('review-name-light');
    await page.locator('[data-reviewer-name]').fill('Rosa');
    await page.locator('[data-reviewer-dialog] button[type="submit"]').click();
    await page.locator('[data-reviewer]', { hasText: 'reviewing as Rosa' }).waitFor();
    expect(JSON.parse(fs.readFileSync(path.join(home, 'preferences.json'), 'utf8')).reviewer).toBe('Rosa');
  });

  it('the ? sheet says which number key sets which status, and hands the keyboard back when closed', async () => {
    await page.locator('[data-row="0"] .layer').click();
    await page.keyboard.press('?');
    const sheet = page.locator('[role="dialog"][aria-label="Keys"]');
    await sheet.waitFor();
    const text = await sheet.textContent();
    const statuses = (await api('review.vocabulary', {})).statuses.map((s: { name: string }) => s.name);
    expect(statuses.length).toBe(5);
    statuses.forEach((s: string, i: number) => expect(text).toContain(`${i + 1}status “${s}” (roster)`));
    await shot('keys-light');
    await page.keyboard.press('m'); // inside the sheet: not a shortcut
    expect(page.url()).toContain('#/roster');
    await page.keyboard.press('Escape');
    await sheet.waitFor({ state: 'detached' });
  });

  it('tags the unit under the cursor with t, in the roster', async () => {
    const key = (await page.locator('[data-row="0"]').getAttribute('data-unit'))!;
    unit = { layer: key.slice(0, key.lastIndexOf(':')), unit: Number(key.slice(key.lastIndexOf(':') + 1)) };
    await page.locator('[data-row="0"] .layer').click();
    await page.keyboard.press('t');
    await page.locator('[data-review-dock] [data-tag-input]').waitFor();
    expect(await page.evaluate(() => document.activeElement?.hasAttribute('data-tag-input'))).toBe(true);
    await page.keyboard.type('follow-up');
    await page.keyboard.press('Enter');
    await page.locator('[data-row="0"] [data-row-tag="follow-up"]').waitFor();
    await page.locator('[data-review-dock] [data-tag="follow-up"]').waitFor();
    await shot('review-roster-dock-light');
    await page.keyboard.press('Escape');
    await page.locator('[data-review-dock]').waitFor({ state: 'detached' });
    // The queue: only this unit is "mine"; it has left "untagged".
    await page.locator('[data-queue="mine"]').click();
    await expect.poll(() => page.locator('[data-row-count]').getAttribute('data-row-count')).toBe('1');
    await page.locator('[data-queue="untagged"]').click();
    await page.locator(`[data-unit="${key}"]`).waitFor({ state: 'detached' });
    await page.locator('[data-queue="all"]').click();
    await page.locator(`[data-row="0"][data-unit="${key}"]`).waitFor();
  });

  it('a colleague gets a copy of the study (save as)', async () => {
    // What File ▸ Save study as… does in the desktop shell: a consistent copy, sent to a colleague.
    await api('study.saveAs', { study, out: copy });
    expect(fs.existsSync(copy)).toBe(true);
  });

  it('writes a note with a live preview and sets a status in the unit profile; undo reverts the last change', async () => {
    await page.locator('[data-row="0"] .layer').click();
    await page.keyboard.press('Enter');
    await page.locator('[data-panel="review"] [data-note-input]').waitFor();
    await page.keyboard.press('n');
    expect(await page.evaluate(() => document.activeElement?.hasAttribute('data-note-input'))).toBe(true);
    await page.keyboard.type('Fires on **red** tiles <script>alert(1)</script>');
    // The preview comes from core's renderer: bold rendered, the script tag shown as text, never run.
    await page.locator('[data-panel="review"] [data-note-html] strong', { hasText: 'red' }).waitFor();
    expect(await page.locator('[data-panel="review"] [data-note-html] script').count()).toBe(0);
    await page.keyboard.press('Control+Enter');
    await page.locator('[data-panel="review"] [data-save-note]').waitFor({ state: 'detached' });
    await noteShows('<script>alert(1)</script>');
    await page.locator('[data-panel="review"] [data-status="looking"]').click();
    await page.locator('[data-panel="review"] [data-status="looking"][aria-pressed="true"]').waitFor();
    await page.locator('[data-panel="review"] [data-status="doubtful"]').click();
    await page.locator('[data-panel="review"] [data-status="doubtful"][aria-pressed="true"]').waitFor();
    await shot('review-profile-light');
    await page.locator('[data-panel="review"] [data-undo]').click();
    await page.locator('[data-panel="review"] [data-status="looking"][aria-pressed="true"]').waitFor();
    expect(await page.locator('[data-panel="review"] [data-undo-note]').textContent()).toContain('status');
    await setTheme('dark');
    await shot('review-profile-dark');
    await setTheme('light');
  });

  it('keeps the typed text when another writer changed the note first', async () => {
    const now = await api('review.get', { study, layer: unit.layer, unit: unit.unit });
    // Another writer (a second window, the command line) saves a note behind the screen's back.
    await api('review.edit', { study, layer: unit.layer, unit: unit.unit, version: now.annotation.version, reviewer: 'Rosa', changes: { note: 'Fires on red tiles (second window)' } });
    const box = page.locator('[data-panel="review"] [data-note-input]');
    await box.fill('Fires on red tiles, strongest at the centre');
    await page.locator('[data-panel="review"] [data-save-note]').click();
    await page.locator('[data-panel="review"] [data-edit-conflict]').waitFor();
    expect(await page.locator('[data-their-note]').textContent()).toBe('Fires on red tiles (second window)');
    expect(await box.inputValue()).toBe('Fires on red tiles, strongest at the centre'); // nothing typed is lost
    await shot('review-edit-conflict-light');
    await page.locator('[data-panel="review"] [data-reapply]').click();
    await page.locator('[data-panel="review"] [data-edit-conflict]').waitFor({ state: 'detached' });
    await noteShows('strongest at the centre');
    expect((await api('review.get', { study, layer: unit.layer, unit: unit.unit })).annotation.note).toBe('Fires on red tiles, strongest at the centre');
  });

  it('exports the review as a bundle from the Merge screen', async () => {
    await page.locator('h1').first().click();
    await page.keyboard.press('m');
    await page.getByRole('heading', { name: 'Merge', exact: true }).waitFor();
    await page.locator('[data-export-path]').fill(bundle);
    await page.locator('[data-export]').click();
    await page.locator('[data-exported]').waitFor();
    const written = JSON.parse(fs.readFileSync(bundle, 'utf8'));
    expect(written.units.length).toBe(1);
    await shot('review-merge-empty-light');
  });

  it('in the copy, the colleague writes a different note, then merges the bundle and decides the conflict on screen', async () => {
    await open(profileOf(copy));
    await page.locator('[data-study-name]', { hasText: 'demo-tomas.study' }).waitFor();
    await setReviewer('Tomas');
    await page.locator('[data-panel="review"] [data-tag="follow-up"]').waitFor(); // the copy has the tag from before
    await page.locator('[data-panel="review"] [data-note-input]').fill('Red and orange tiles alike');
    await page.locator('[data-panel="review"] [data-save-note]').click();
    await noteShows('Red and orange tiles alike');

    await page.locator('h1').first().click();
    await page.keyboard.press('m');
    await page.locator('[data-bundle-path]').fill(bundle);
    await page.locator('[data-look]').click();
    await page.locator('[data-merge-conflicts] [data-conflict="note"]').waitFor();
    // The status change does not collide and merges as it is.
    expect(await page.locator('[data-changes]').textContent()).toContain('looking');
    // The choices in our own words, not a version-control tool's.
    const choices = await page.locator('[data-merge-conflicts] [data-conflict="note"]').textContent();
    expect(choices).toContain('As this study has it');
    expect(choices).toContain('As the bundle has it');
    expect(choices).not.toMatch(/keep (mine|theirs)/i);
    await shot('review-merge-conflict-light');
    await setTheme('dark');
    await shot('review-merge-conflict-dark');
    await setTheme('light');
    const conflict = page.locator('[data-merge-conflicts] [data-conflict="note"]');
    await conflict.locator('[data-keep="edit"]').check();
    await conflict.locator('[data-edit-value]').fill('Red tiles, strongest at the centre; orange ones too (Tomas)');
    await page.locator('[data-merge]').click();
    await page.locator('[data-merged]').waitFor();
    expect(await page.locator('[data-merged]').textContent()).not.toContain('still to decide');
    await shot('review-merged-light');

    await open(profileOf(copy));
    await noteShows('orange ones too (Tomas)');
    await page.locator('[data-panel="review"] [data-status="looking"][aria-pressed="true"]').waitFor();
    const merged = await api('review.get', { study: copy, layer: unit.layer, unit: unit.unit });
    expect(merged.annotation.note).toBe('Red tiles, strongest at the centre; orange ones too (Tomas)');
    expect(merged.conflicts).toEqual([]);
  });

  it('lists what the merge changed, and undoes in the roster with z', async () => {
    await open(`#/roster?study=${encodeURIComponent(copy)}`);
    await page.locator('[data-row="0"]').waitFor();
    await page.locator('[data-queue="merged"]').click();
    await expect.poll(() => page.locator('[data-row-count]').getAttribute('data-row-count')).toBe('1');
    await page.locator('[data-row="0"] [data-row-status="looking"]').waitFor();
    await shot('review-roster-merged-light');
    await setTheme('dark');
    await page.locator('[data-row="0"] .layer').click();
    await page.keyboard.press('t');
    // Type only once t has moved the focus into the tag field (a keystroke before that goes to the page).
    await expect.poll(() => page.evaluate(() => document.activeElement?.hasAttribute('data-tag-input'))).toBe(true);
    await page.keyboard.type('for-meeting');
    await page.keyboard.press('Enter');
    await page.locator('[data-row="0"] [data-row-tag="for-meeting"]').waitFor();
    await shot('review-roster-dock-dark');
    await page.keyboard.press('Escape');
    await page.keyboard.press('z');
    await page.locator('[data-row="0"] [data-row-tag="for-meeting"]').waitFor({ state: 'detached' });
    await page.locator('[data-undo-note]', { hasText: 'tag for-meeting' }).waitFor();
    await setTheme('light');
  });

  it('writes the meeting report of the tagged units, HTML and CSV', async () => {
    await page.keyboard.press('m');
    await page.getByRole('heading', { name: 'Merge', exact: true }).waitFor();
    const out = path.join(home, 'meeting.html');
    await page.locator('[data-report-path]').fill(out);
    await page.locator('[data-report]').click();
    await page.locator('[data-reported]').waitFor();
    const html = fs.readFileSync(out, 'utf8');
    expect(html).toContain('orange ones too (Tomas)');
    expect(fs.readFileSync(path.join(home, 'meeting.csv'), 'utf8')).toContain(unit.layer);
    await shot('review-merge-report-light');
    await setTheme('dark');
    await shot('review-merge-report-dark');
    await setTheme('light');
  });

  it('ran without a console error', () => {
    expect(problems.slice(0, 20).join('\n')).toBe('');
  });
});
