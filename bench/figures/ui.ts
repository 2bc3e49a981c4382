/**
 * UI (real Chromium, browser mode: app/server over loopback, the renderer built with vite, the real API and SQLite):
 *  - open: navigate to the roster of a study of 10^5 units → the first frame that shows ranked rows
 *    (from the navigation's time origin: page load, study.summary, units.table, first render);
 *  - detail: Enter on the first row → the first frame that shows the unit's statistics (unit.detail answered);
 *    also → its first chart drawn;
 *  - filter: one keystroke in the roster's search box → the first frame whose row count changed.
 * Times are taken inside the page: from the key event's own timeStamp (or the time origin) to the
 * requestAnimationFrame callback that first sees the new state, i.e. the frame about to be painted.
 */
import fs from 'node:fs';
import path from 'node:path';
import { repoRoot, median, runChild } from '../lib/measure.ts';
import { buildStudy } from '../lib/study.ts';

export type UiFigure =
  | { measured: false; reason: string }
  | {
    measured: true; problems: string[]; command: string; units: number; layers: number; probes: number; reps: number; scoreSeconds: number;
    /** Peak RSS of scoreStudy on this study (10^5 units): how the job's memory grows with the unit count. */
    scorePeakRssMb: number;
    /** Medians, ms from the navigation start: page scripts evaluated; units.table asked; its answer received. */
    openPhases: { scriptsDone: number; tableStart: number; tableEnd: number };
    openMs: number; detailMs: number; chartMs: number; filterMs: number;
    /** The same study's units.table request answered in-process (no HTTP, no browser): the server's share of "open". */
    tableApiMs: number; tableBytes: number;
    openRuns: number[]; detailRuns: number[]; chartRuns: number[]; filterRuns: number[];
  };

const CHROMIUM = '/usr/bin/chromium';
const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];
/** The study's units are spread over this many layers (names synthetic0 … synthetic24), as a deep model's would be. */
const LAYERS = 25;

export function uiMissing(): string | null {
  const pkg = JSON.parse(fs.readFileSync(path.join(repoRoot, 'package.json'), 'utf8')) as { scripts?: Record<string, string> };
  const missing: string[] = [];
  if (!pkg.scripts?.['build:renderer']) missing.push('no "build:renderer" script in package.json');
  if (!fs.existsSync(path.join(repoRoot, 'app/renderer/vite.config.ts'))) missing.push('no app/renderer/vite.config.ts');
  const server = path.join(repoRoot, 'app/server/index.ts');
  if (!fs.existsSync(server) || !/export\s+(async\s+)?function\s+startServer/.test(fs.readFileSync(server, 'utf8'))) missing.push('no startServer in app/server/index.ts');
  if (!fs.existsSync(CHROMIUM)) missing.push(`no Chromium at ${CHROMIUM}`);
  return missing.length ? `the screens are not ready (${missing.join('; ')})` : null;
}

/** In the page: resolves with performance.now() at the first animation frame where `ready()` holds. */
const FRAME_WAIT = `(ready) => new Promise((resolve) => {
  const check = () => { if (ready()) resolve(performance.now()); else requestAnimationFrame(check); };
  requestAnimationFrame(check);
})`;

export async function uiFigure(dir: string, units: number, probes: number, reps: number, log: (s: string) => void): Promise<UiFigure> {
  const missing = uiMissing();
  if (missing) return { measured: false, reason: missing };
  // loaded only when the screens exist, so the other figures run without them
  const { build } = await import('vite');
  const { chromium } = await import('playwright-core');
  const { startServer } = await import('../../app/server/index.ts');

  fs.mkdirSync(dir, { recursive: true });
  const rendererDir = path.join(dir, 'renderer');
  await build({ configFile: path.join(repoRoot, 'app/renderer/vite.config.ts'), logLevel: 'error', build: { outDir: rendererDir, emptyOutDir: true } });
  const study = path.join(dir, `ui-${units}.study`);
  const layerUnits = Math.ceil(units / LAYERS);
  const built = buildStudy(study, { probes, units, labels: 30, seed: 9 }, { layerUnits });
  const scored = await runChild<{ seconds: number }>('score.ts', [study]);
  const layers = Math.ceil(units / layerUnits);
  log(`  ui study: ${units} units in ${layers} layers × ${probes} probes, built in ${built.seconds.toFixed(1)} s, scored in ${scored.value.seconds.toFixed(1)} s`);

  const { createApi } = await import('../../core/api/index.ts');
  const api = createApi({}) as unknown as Record<string, (r: unknown) => Promise<unknown>>;
  const tableRuns: number[] = [];
  let tableBytes = 0;
  for (let rep = 0; rep < 3; rep++) {
    const t = performance.now();
    const table = await api['units.table']({ study });
    tableRuns.push(performance.now() - t);
    tableBytes = JSON.stringify(table).length;
  }

  const dataDir = path.join(dir, 'home');
  fs.mkdirSync(dataDir, { recursive: true });
  const server = await startServer({ port: 0, roots: [dir], rendererDir, dataDir });
  const context = await chromium.launchPersistentContext(path.join(dir, 'chromium-profile'), {
    executablePath: CHROMIUM, headless: true, args: CHROMIUM_ARGS, viewport: { width: 1360, height: 860 }, colorScheme: 'light',
  });
  const problems: string[] = [];
  const openRuns: number[] = [];
  const detailRuns: number[] = [];
  const chartRuns: number[] = [];
  const filterRuns: number[] = [];
  const openPhases: { scriptsDone: number; tableStart: number; tableEnd: number }[] = [];
  try {
    const rosterUrl = `${server.url}#/roster?study=${encodeURIComponent(study)}`;
    let step = 'open';
    for (let rep = 0; rep < reps; rep++) {
      step = 'open';
      const page = await context.newPage();
      page.on('pageerror', (e) => problems.push(`${step}: page error: ${e.message}`));
      page.on('console', (m) => { if (m.type() === 'error') problems.push(`${step}: ${m.text()}`); });
      await page.addInitScript(() => {
        const w = window as unknown as { __keyAt: number };
        w.__keyAt = -1;
        addEventListener('keydown', (e) => { w.__keyAt = e.timeStamp; }, { capture: true });
      });

      // open: from the navigation's time origin to the first frame with ranked rows
      await page.goto(rosterUrl, { waitUntil: 'commit' });
      const openAt = await page.evaluate(`(${FRAME_WAIT})(() => !!document.querySelector('[data-row="0"]'))`) as number;
      openRuns.push(openAt);
      const phases = await page.evaluate(`(() => {
        const nav = performance.getEntriesByType('navigation')[0];
        const table = performance.getEntriesByType('resource').find((e) => e.name.endsWith('/api/units.table'));
        return { scriptsDone: nav.domContentLoadedEventEnd, tableStart: table ? table.startTime : NaN, tableEnd: table ? table.responseEnd : NaN };
      })()`) as { scriptsDone: number; tableStart: number; tableEnd: number };
      openPhases.push(phases);
      const total = Number(await page.locator('[data-row-count]').getAttribute('data-row-count'));
      if (total !== units) throw new Error(`the roster lists ${total} units, the study has ${units}`);

      step = 'detail';
      // detail: Enter on the cursor row → statistics shown, then the first chart drawn
      await page.locator('[data-roster-body]').click({ position: { x: 5, y: 5 } });
      await page.locator('[data-row="0"]').click();
      const detailWait = page.evaluate(`(${FRAME_WAIT})(() => !!document.querySelector('[data-panel="drivers"]'))`) as Promise<number>;
      const chartWait = page.evaluate(`(${FRAME_WAIT})(() => !!document.querySelector('[data-plot="spread"] path.js-line'))`) as Promise<number>;
      await page.keyboard.press('Enter');
      const [detailAt, chartAt] = await Promise.all([detailWait, chartWait]);
      const enterAt = await page.evaluate('window.__keyAt') as number;
      detailRuns.push(detailAt - enterAt);
      chartRuns.push(chartAt - enterAt);

      step = 'filter';
      // filter: back to the roster, then single keystrokes that each change the rows
      await page.keyboard.press('Escape');
      await page.locator('[data-row="0"]').waitFor();
      const search = page.locator('[data-search]');
      // "synthetic" matches every layer; "synthetic2" layers 2 and 20–24; "synthetic21" one layer; then back
      await search.fill('synthetic');
      await page.locator('[data-row="0"]').waitFor();
      const keys = ['2', '1', 'Backspace', 'Backspace'];
      for (const key of keys) {
        const before = await page.locator('[data-row-count]').getAttribute('data-row-count');
        const wait = page.evaluate(`(${FRAME_WAIT})(() => document.querySelector('[data-row-count]')?.getAttribute('data-row-count') !== ${JSON.stringify(before)})`) as Promise<number>;
        await search.press(key);
        const changedAt = await wait;
        filterRuns.push(changedAt - (await page.evaluate('window.__keyAt') as number));
      }
      await page.close();
      log(`  ui rep ${rep + 1}/${reps}: open ${openAt.toFixed(0)} ms, detail ${detailRuns[rep].toFixed(0)} ms (chart ${chartRuns[rep].toFixed(0)} ms), filter ${filterRuns.slice(-keys.length).map((x) => x.toFixed(0)).join('/')} ms`);
    }
  } finally {
    await context.close();
    await server.close();
  }
  return {
    measured: true, problems: [...new Set(problems)],
    command: 'app/server startServer + the renderer built with vite + Chromium (playwright-core), headless, 1360×860',
    units, layers, probes, reps, scoreSeconds: scored.value.seconds, scorePeakRssMb: scored.peakRssMb,
    tableApiMs: median(tableRuns), tableBytes,
    openPhases: {
      scriptsDone: median(openPhases.map((p) => p.scriptsDone)),
      tableStart: median(openPhases.map((p) => p.tableStart)),
      tableEnd: median(openPhases.map((p) => p.tableEnd)),
    },
    openMs: median(openRuns), detailMs: median(detailRuns), chartMs: median(chartRuns), filterMs: median(filterRuns),
    openRuns, detailRuns, chartRuns, filterRuns,
  };
}
