/**
 * `skein ablate`: what removing a unit costs per label, from the command line. Usage problems print one line and
 * return 2; SkeinErrors go up to main (one line, exit 1; a cancelled run exits 130 and resumes when run again).
 */
import path from 'node:path';
import { parseArgs } from 'node:util';
import { parseRequest, type Api } from '../api/index.ts';
import { runAblateLayer, ABLATION_CAUTION, type UnitAblationView, type LayerAblationView } from '../api/ablation.ts';
import type { ProgressReport } from '../api/contract.ts';

export const ABLATE_HELP = `  skein ablate <study> <model.onnx> --layer L (--unit U | --all) [--mode zero|mean|value] [--value X]
               [--sample N] [--seed S] [--json]     what removing a unit costs per label (--all: every unit, resumable)`;

const METRIC_WORDS: Record<string, string> = {
  'target-drop': 'drop of the target output (targets.csv)',
  'squared-error': 'rise of the squared error against targets.csv',
  kl: 'KL divergence of the output distribution',
  l2: 'L2 change of the output (no targets.csv)',
};

const fmt = (x: number | null | undefined, d = 3) => (x === null || x === undefined || !Number.isFinite(x) ? '—' : x.toFixed(d));

function table(head: string[], rows: string[][]): void {
  const widths = head.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
  const line = (r: string[]) => r.map((c, i) => c.padEnd(widths[i])).join('  ').trimEnd();
  console.log(line(head));
  for (const r of rows) console.log(line(r));
}

function printUnit(v: UnitAblationView): void {
  const { run, cost } = v;
  console.log(`${v.layer} unit ${v.unit}: ${run.mode === 'value' ? `set to ${run.value}` : `${run.mode} ablation`} over ${run.probes} probes${run.sample ? ` (seeded sample, seed ${run.seed})` : ''}`);
  console.log(`cost measured as the ${METRIC_WORDS[cost.metric] ?? cost.metric} of output "${run.output}"; minimum effect ${fmt(cost.floor, 4)}; ${cost.reps} bootstrap resamples`);
  console.log(`hurt: ${cost.hurt.length ? cost.hurt.join(', ') : 'none'}   unrelated concepts hurt: ${fmt(cost.conceptsHurt, 2)}   largest: ${cost.largest ? `${cost.largest.label} ${fmt(cost.largest.mean, 4)}` : '—'}`);
  console.log(`every probe: mean cost ${fmt(cost.overall.mean, 4)}${cost.overall.costly ? ' — the model gets worse across the board' : ''}`);
  console.log(`drivers: ${v.drivers.length ? v.drivers.join(', ') : 'none'}\n${v.comparison.sentence}\n`);
  const acc = cost.labels.some((l) => l.accuracyBase !== null);
  table(['  label', 'n', 'mean cost', '95% interval', 'q', 'hurt', ...(acc ? ['accuracy'] : [])],
    [...cost.labels].sort((a, b) => b.mean - a.mean).map((l) => [
      `  ${l.label}`, String(l.n), fmt(l.mean, 4), l.interval ? `${fmt(l.interval[0], 4)} … ${fmt(l.interval[1], 4)}` : '', l.q.toExponential(2), l.hurt ? 'yes' : '',
      ...(acc ? [`${fmt(l.accuracyBase, 2)} → ${fmt(l.accuracyAblated, 2)}`] : []),
    ]));
  console.log(`\n${ABLATION_CAUTION}`);
}

function printLayer(v: LayerAblationView): void {
  if (!v.run) { console.log(`No ablation results for ${v.layer} yet.`); return; }
  console.log(`${v.layer}: ${v.run.done} of ${v.units} units, ${v.run.mode} ablation over ${v.run.probes} probes, ranked by unrelated concepts hurt`);
  table(['#', 'unit', 'concepts hurt', 'hurt labels', 'largest cost', 'drivers'], v.rows.map((r, i) => [
    String(i + 1), String(r.unit), fmt(r.conceptsHurt, 2), r.hurt.join(', ') || 'none', r.largestLabel ? `${r.largestLabel} ${fmt(r.largestMean, 4)}` : '—', r.drivers.join(', ') || 'none',
  ]));
  console.log(`\n${ABLATION_CAUTION}`);
}

function progressLine(p: ProgressReport): void {
  const pct = p.total ? Math.floor((100 * p.done) / p.total) : 100;
  const eta = p.etaSeconds === null ? '' : ` eta ${Math.ceil(p.etaSeconds)}s`;
  const line = `ablating ${p.done}/${p.total} units (${pct}%)${eta}`;
  if (process.stderr.isTTY) process.stderr.write(`\r${line.padEnd(60)}${p.done >= p.total ? '\n' : ''}`);
  else if (p.done >= p.total || pct % 25 === 0) process.stderr.write(line + '\n');
}

/** Returns the exit code; throws SkeinError for main to print. */
export async function ablateCommand(argv: string[], api: Api): Promise<number> {
  let parsed;
  try {
    parsed = parseArgs({
      args: argv, allowPositionals: true, strict: true,
      options: { layer: { type: 'string' }, unit: { type: 'string' }, all: { type: 'boolean' }, mode: { type: 'string' }, value: { type: 'string' }, sample: { type: 'string' }, seed: { type: 'string' }, json: { type: 'boolean' } },
    });
  } catch (e) {
    return usage((e as Error).message);
  }
  const { values: o, positionals } = parsed;
  if (positionals.length !== 2) return usage(`expected <study> <model.onnx>, got ${positionals.length} argument(s)`);
  if (!o.layer) return usage('--layer L is required');
  if (o.unit === undefined && !o.all) return usage('give --unit U or --all');
  if (o.unit !== undefined && o.all) return usage('give either --unit U or --all, not both');
  const num = (v: string | undefined, name: string, integer: boolean) => {
    if (v === undefined) return undefined;
    const n = Number(v);
    if (v.trim() === '' || !Number.isFinite(n) || (integer && (!Number.isInteger(n) || n < 0))) throw new UsageError(`--${name} needs ${integer ? 'a whole number' : 'a number'}, got "${v}"`);
    return n;
  };
  let body: Record<string, unknown>;
  try {
    if (o.mode === 'value' && o.value === undefined) return usage('--mode value needs --value X');
    if (o.value !== undefined && o.mode !== undefined && o.mode !== 'value') return usage('--value goes with --mode value');
    body = {
      study: path.resolve(positionals[0]), model: path.resolve(positionals[1]), layer: o.layer,
      mode: o.mode ?? (o.value !== undefined ? 'value' : undefined), value: num(o.value, 'value', false),
      sample: num(o.sample, 'sample', true), seed: num(o.seed, 'seed', true),
    };
  } catch (e) {
    if (e instanceof UsageError) return usage(e.message);
    throw e;
  }
  if (o.unit !== undefined) {
    const unit = Number(o.unit);
    if (!Number.isInteger(unit) || unit < 0) return usage(`--unit needs a 0-based whole number, got "${o.unit}"`);
    const v = await api['ablate.unit'](parseRequest('ablate.unit', { ...body, unit }));
    if (o.json) console.log(JSON.stringify(v, null, 1));
    else printUnit(v);
    return 0;
  }
  const req = parseRequest('ablate.start', body);
  const controller = new AbortController();
  const onSignal = () => controller.abort();
  process.once('SIGINT', onSignal);
  process.once('SIGTERM', onSignal);
  try {
    const s = await runAblateLayer(req, { signal: controller.signal, onProgress: progressLine, onNote: (m) => process.stderr.write(`note: ${m}\n`) });
    process.stderr.write(`${s.computed} units ablated, ${s.reused} reused, in ${fmt(s.seconds, 1)}s (${fmt(s.perUnitSeconds * 1000, 1)} ms per unit)\n`);
    const view = await api['ablate.layer'](parseRequest('ablate.layer', { study: req.study, layer: req.layer, run: s.run.id }));
    if (o.json) console.log(JSON.stringify(view, null, 1));
    else printLayer(view);
  } finally {
    process.off('SIGINT', onSignal);
    process.off('SIGTERM', onSignal);
  }
  return 0;
}

class UsageError extends Error {}

function usage(message: string): number {
  process.stderr.write(`skein ablate: ${message}. Run skein help for usage.\n`);
  return 2;
}
