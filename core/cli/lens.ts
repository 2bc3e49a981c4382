/**
 * `skein lens <study> [--layer L] [--json] [--export DIR]`: the superposition lens from the command line, through
 * the same job requests as the screens (progress on stderr, Ctrl-C cancels, a cached result is reused).
 */
import { parseRequest, type Api } from '../api/index.ts';
import type { LensResult, ProgressReport } from '../api/contract.ts';
import { SkeinError } from '../errors.ts';
import { UsageError, parse } from './args.ts';

export const LENS_HELP = `  skein lens <study> [--layer L] [--json] [--export DIR]
                                  how many concepts a layer packs beyond its width, and how they interfere;
                                  --export writes CSV/JSON of every figure and the directions as .npy into DIR`;

const f = (x: number | null, d = 3) => (x === null ? '—' : x.toFixed(d));

function printLens(r: LensResult, reused: boolean): void {
  console.log(`${r.layer}: ${r.units} units, ${r.probes} probes${r.probesFitted < r.probes ? ` (probes fitted on a seeded sample of ${r.probesFitted})` : ''}, ${r.folds}-fold, seed ${r.seed}${reused ? ', cached' : ''}`);
  console.log(r.summary);
  const rows = [...r.concepts].sort((a, b) => (b.auroc ?? -1) - (a.auroc ?? -1)).map((c) => [
    c.name, String(c.positives), f(c.auroc), c.carried ? (c.decodable ? 'decodable' : 'carried') : 'not carried', f(c.norm), f(c.dimensionality, 2), f(c.interference, 2),
    c.k95 === null ? '' : String(c.k95), c.carried ? c.locality : '', c.carried ? c.topUnits.slice(0, 4).map((u) => `${u.unit}:${u.loading >= 0 ? '+' : '−'}${Math.abs(u.loading).toFixed(2)}`).join(' ') : '',
  ]);
  const head = ['concept', 'probes', 'probe AUROC', 'linear', 'norm', 'dim.', 'interf.', 'k95', 'where', 'leans on (unit:loading)'];
  const widths = head.map((h, i) => Math.max(h.length, ...rows.map((row) => row[i].length)));
  const line = (row: string[]) => row.map((c, i) => c.padEnd(widths[i])).join('  ').trimEnd();
  console.log('\n' + line(head));
  for (const row of rows) console.log(line(row));
  console.log(`\n${r.caution}\n`);
}

async function runOne(api: Api, study: string, layer: string): Promise<{ result: LensResult; reused: boolean }> {
  const cached = await api['lens.get'](parseRequest('lens.get', { study, layer }));
  if (cached.state === 'ready') return { result: cached.result, reused: true };
  const { job } = await api['lens.start'](parseRequest('lens.start', { study, layer }));
  const cancel = () => { void api['lens.cancel']({ job }); };
  process.once('SIGINT', cancel);
  process.once('SIGTERM', cancel);
  let last = '';
  const show = (p: ProgressReport | null) => {
    if (!p) return;
    const line = `lens ${layer}: ${p.done}/${p.total}${p.etaSeconds === null ? '' : ` eta ${Math.ceil(p.etaSeconds)}s`}`;
    if (line !== last && process.stderr.isTTY) process.stderr.write(`\r${line.padEnd(50)}`);
    last = line;
  };
  try {
    for (;;) {
      const s = await api['lens.job']({ job });
      show(s.progress);
      if (s.state === 'done') { if (process.stderr.isTTY) process.stderr.write('\n'); return { result: s.result!, reused: false }; }
      if (s.state !== 'running') throw new SkeinError(s.error ?? { code: 'io', message: 'The lens stopped without saying why.' });
      await new Promise((resolve) => setTimeout(resolve, 100));
    }
  } finally {
    process.off('SIGINT', cancel);
    process.off('SIGTERM', cancel);
  }
}

export async function lensCommand(argv: string[], api: Api): Promise<number> {
  const parsed = parse(argv, { layer: { type: 'string' }, json: { type: 'boolean' }, export: { type: 'string' } }, 1);
  if (parsed.values.export !== undefined && typeof parsed.values.export !== 'string') throw new UsageError('--export needs a folder name');
  const study = parsed.positionals[0];
  const layers = typeof parsed.values.layer === 'string' ? [parsed.values.layer] : (await api['study.summary'](parseRequest('study.summary', { study }))).layers.map((l) => l.name);
  const results: LensResult[] = [];
  for (const layer of layers) {
    const { result, reused } = await runOne(api, study, layer);
    results.push(result);
    if (!parsed.values.json) printLens(result, reused);
    if (parsed.values.export) {
      const out = await api['lens.export'](parseRequest('lens.export', { study, layer, out: parsed.values.export as string }));
      process.stderr.write(`wrote ${out.files.length} files for ${result.layer} to ${parsed.values.export}\n`);
    }
  }
  if (parsed.values.json) console.log(JSON.stringify(parsed.values.layer ? results[0] : results, null, 1));
  return 0;
}
