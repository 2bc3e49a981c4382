/**
 * The meeting report, opened in real Chromium from a file:// URL: it shows the units, their SVG plots, thumbnails and
 * notes, makes no network request at all, runs no script, and its content-security policy admits its own stylesheet
 * (a wrong hash would leave the page unstyled). The CSV is read back with csv-parse, a reference CSV parser.
 */
import fs from 'node:fs';
import path from 'node:path';
import { parse as parseCsv } from 'csv-parse/sync';
import { chromium, type BrowserContext } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApi, dispatch, type ApiContext } from '../../core/api/index.ts';
import type { Annotation, ReportResult, UnitReview } from '../../core/api/review.ts';
import { CSV_COLUMNS } from '../../core/review/report.ts';
import { tempDir } from '../support/fixtures.ts';
import { scannedStudy, type ScannedStudy } from './helpers.ts';

const CHROMIUM = '/usr/bin/chromium';
const screenshots = path.resolve(import.meta.dirname, '../../test-output/screenshots');

describe('meeting report', () => {
  let s: ScannedStudy;
  let browser: BrowserContext;
  const ctx: ApiContext = {};
  const api = createApi(ctx);
  const call = <T>(method: string, body: unknown) => dispatch(api, ctx, method, body) as Promise<T>;
  async function edit(unit: number, reviewer: string, changes: Record<string, unknown>) {
    const cur = await call<UnitReview>('review.get', { study: s.study, layer: 'planted', unit });
    return call<Annotation>('review.edit', { study: s.study, layer: 'planted', unit, version: cur.annotation.version, reviewer, changes });
  }

  beforeAll(async () => {
    s = await scannedStudy({ images: true });
    await edit(3, 'ana', {
      addTags: ['mixed', 'for-meeting'], status: 'confirmed',
      note: '## Three concepts\nRed, **circle** and top drive it about equally.\n\n<script>window.pwned = 1</script> [more](https://example.org/notes) <img src="https://example.org/x.png">',
    });
    await edit(1, 'ben', { addTags: ['mixed'], status: 'doubtful', note: 'Blue and square: is the *square* label noisy?\n\n- check 20 examples\n- ask who labelled them' });
    await edit(2, 'ben', { addTags: ['for-meeting'], status: 'looking', note: 'Related hues, so the count stays below 2.' });
    await edit(0, 'ana', { addTags: ['single-concept'], status: 'parked' });
    const userData = tempDir('skein-chromium-');
    browser = await chromium.launchPersistentContext(userData, {
      executablePath: CHROMIUM, viewport: { width: 1100, height: 900 },
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    });
  });
  afterAll(async () => { await browser?.close(); });

  it('opens offline with no request but the document, shows units, plots, thumbnails and notes, and runs no script', async () => {
    const out = path.join(s.dir, 'meeting.html');
    const csv = path.join(s.dir, 'meeting.csv');
    const r = await call<ReportResult>('report.write', { study: s.study, out, csv, filter: {}, reviewer: 'ana' });
    expect(r.units).toBe(4);
    const html = fs.readFileSync(out, 'utf8');

    // No URL of any kind: in-page anchors and data: images only, no script, no external stylesheet or font.
    for (const m of html.matchAll(/\b(href|src)="([^"]*)"/g)) {
      if (m[1] === 'href') expect(m[2]).toMatch(/^#u\d+$/);
      else expect(m[2]).toMatch(/^data:image\/png;base64,/);
    }
    expect(html).not.toMatch(/<script|<link|<iframe|<object|@import|url\(|xmlns/i);
    expect(html).toMatch(/<meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'sha256-[A-Za-z0-9+/=]+'; base-uri 'none'; form-action 'none'">/);

    const page = await browser.newPage();
    const requests: string[] = [];
    const consoleMessages: string[] = [];
    page.on('request', (q) => requests.push(q.url()));
    page.on('console', (m) => consoleMessages.push(m.text()));
    const url = `file://${out}`;
    await page.goto(url);
    await page.waitForLoadState('load');
    expect(requests.filter((u) => !u.startsWith('data:'))).toEqual([url]);
    expect(consoleMessages.filter((m) => /Content Security Policy|Refused/i.test(m))).toEqual([]);

    expect(await page.evaluate(() => (window as unknown as { pwned?: number }).pwned)).toBeUndefined();
    expect(await page.locator('script').count()).toBe(0);
    // The stylesheet applied: the policy's hash matches it.
    expect(await page.locator('.unit').first().evaluate((e) => getComputedStyle(e).borderTopStyle)).toBe('solid');

    const cards = page.locator('section.unit');
    expect(await cards.count()).toBe(4);
    // Most polysemantic first: planted unit 3 (three concepts by construction), then 1, 2, 0.
    expect(await page.locator('section.unit h3').allTextContents()).toEqual(['planted · unit 3', 'planted · unit 1', 'planted · unit 2', 'planted · unit 0']);
    expect(await page.locator('svg.plot').count()).toBe(2 + 4 * 2);
    const first = cards.first();
    expect(await first.locator('.note h2').textContent()).toBe('Three concepts');
    expect(await first.locator('.note').textContent()).toContain('<script>window.pwned = 1</script>');
    expect(await first.locator('.note a, .note img').count()).toBe(0);
    // three equal drivers: their order within the mixture follows sampling noise in the shares
    expect(await first.locator('svg.plot title').first().textContent()).toMatch(/^Mixture: (?=.*circle 33%)(?=.*red 33%)(?=.*top 33%)/);
    const thumbs = first.locator('.examples img');
    expect(await thumbs.count()).toBe(8);
    expect(await thumbs.evaluateAll((imgs) => imgs.every((i) => (i as HTMLImageElement).complete && (i as HTMLImageElement).naturalWidth === 24))).toBe(true);
    expect(await cards.nth(1).locator('.note li').allTextContents()).toEqual(['check 20 examples', 'ask who labelled them']);
    expect(await page.locator('text=Scores and drivers are statistical hypotheses').count()).toBe(1);

    fs.mkdirSync(screenshots, { recursive: true });
    await page.screenshot({ path: path.join(screenshots, 'report.png'), fullPage: true });
    await page.close();

    const rows = parseCsv(fs.readFileSync(csv, 'utf8'), { columns: true }) as Record<string, string>[];
    expect(Object.keys(rows[0])).toEqual(CSV_COLUMNS);
    expect(rows.map((x) => x.unit)).toEqual(['3', '1', '2', '0']);
    expect(rows[0]).toMatchObject({ layer: 'planted', rank: '1', status: 'confirmed', tags: 'for-meeting mixed', reviewer: 'ana' });
    expect(Number(rows[0].concept_count)).toBeCloseTo(3, 1);
    expect(rows[0].mixture.split(' ').map((x) => x.split(':')[0]).sort()).toEqual(['circle', 'red', 'top']);
    expect(rows[0].note).toContain('<script>window.pwned = 1</script>');
    expect(rows[0].top_example_images.split(' ')).toHaveLength(8);
    expect(rows[1].note).toBe('Blue and square: is the *square* label noisy?\n\n- check 20 examples\n- ask who labelled them');
  });

  it('takes only the units the filter selects, and explicit selections even when unannotated', async () => {
    const out = path.join(s.dir, 'tagged.html');
    const r = await call<ReportResult>('report.write', { study: s.study, out, filter: { tags: ['for-meeting'] } });
    expect(r.units).toBe(2);
    const html = fs.readFileSync(out, 'utf8');
    expect(html).toContain('planted · unit 3');
    expect(html).toContain('planted · unit 2');
    expect(html).not.toContain('planted · unit 1<');
    const picked = await call<ReportResult>('report.write', { study: s.study, out, filter: { units: [{ layer: 'planted', unit: 6 }, { layer: 'planted', unit: 1 }] } });
    expect(picked.units).toBe(2);
    const doubtful = await call<ReportResult>('report.write', { study: s.study, out, filter: { statuses: ['doubtful', 'parked'] } });
    expect(doubtful.units).toBe(2);
  });
});
