/**
 * The headless command line: a thin client of core/api. Results go to stdout, progress and notes to stderr,
 * a failure is one line on stderr naming the cause and a non-zero exit.
 */
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { createApi, parseRequest, runScan, toErrorInfo } from '../api/index.ts';
import type { RankRow, UnitDetail, ModelInfo, ProgressReport } from '../api/contract.ts';
import { REVIEW_HELP, reviewCommand, reportCommand } from './review.ts';
import { UsageError, parse, intOption, unitArg } from './args.ts';
import { ABLATE_HELP, ablateCommand } from './ablate.ts';
import { LENS_HELP, lensCommand } from './lens.ts';
import { DICTIONARY_HELP, dictionaryCommand } from './dictionary.ts';

const HELP = `skein — find the polysemantic units of an ONNX model on a labelled probe set

  skein layers <model.onnx> [--json]
  skein scan <model.onnx> <probe-set-folder> --study <file> [--layers a,b] [--batch N] [--pool max|mean|last] [--chunk N]
  skein rank <study> [--layer L] [--top K] [--json]
  skein unit <study> <layer> <unit> [--json]
  skein export <study> --scores out.csv|out.json
  skein export <study> --activations out.npy --layer L
  skein demo [--study file]      scan the bundled demo and print the ranked units
${REVIEW_HELP}
${ABLATE_HELP}
${LENS_HELP}
${DICTIONARY_HELP}

  --verbose (any command)        on failure, also print the original text of an onnxruntime error

Scores are statistical hypotheses about the model on this probe set, not proof: check a unit before pruning or
trusting it.`;

export const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');
export const demoPaths = {
  model: path.join(repoRoot, 'sample-data/tiles-model.onnx'),
  probes: path.join(repoRoot, 'sample-data/tiles'),
};

const fmt = (x: number | null, d = 3) => (x === null ? "—" : Number.isFinite(x) ? x.toFixed(d) : String(x));

function progressPrinter(): (p: ProgressReport) => void {
  const tty = process.stderr.isTTY;
  let last = '';
  return (p) => {
    const pct = p.total ? Math.floor((100 * p.done) / p.total) : 100;
    const eta = p.etaSeconds === null ? '' : ` eta ${Math.ceil(p.etaSeconds)}s`;
    const line = `${p.phase === 'extract' ? 'extracting' : 'scoring'} ${p.done}/${p.total} (${pct}%)${eta}`;
    if (tty) process.stderr.write(`\r${line.padEnd(60)}${p.done >= p.total ? '\n' : ''}`);
    else if (line.split(' (')[0] !== last && (pct % 10 === 0 || p.done >= p.total)) process.stderr.write(line + '\n');
    last = line.split(' (')[0];
  };
}

function printLayers(info: ModelInfo): void {
  const rows = info.tensors.map((t) => [t.isDefault ? '*' : ' ', t.name, t.op, t.node, t.dims ? `[${t.dims.map((d) => d ?? '?').join(',')}]` : '?', t.capturable ? '' : `not capturable: ${t.reason}`]);
  console.log(`${info.path}\n  inputs: ${info.inputs.map((i) => `${i.name} ${i.elemType}[${(i.dims ?? []).map((d) => d ?? '?').join(',')}]`).join(', ')}`);
  console.log('  (* = scanned by default)');
  table(['', 'tensor', 'op', 'node', 'shape', ''], rows);
}

function table(head: string[], rows: string[][]): void {
  const widths = head.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
  const line = (r: string[]) => r.map((c, i) => c.padEnd(widths[i])).join('  ').trimEnd();
  console.log(line(head));
  for (const r of rows) console.log(line(r));
}

function printRank(rows: RankRow[]): void {
  table(['#', 'layer', 'unit', 'concepts [90%]', 'select.', 'flags', 'drivers (share)', 'modulators', 'formula (IoU)'], rows.map((r, i) => [
    String(i + 1), r.layer, String(r.unit), `${fmt(r.conceptCount, 2)} [${fmt(r.conceptLow, 1)}–${fmt(r.conceptHigh, 1)}]`, fmt(r.selectivity, 2), r.flags.join(','),
    r.drivers.map((d) => `${d.label} ${Math.round(d.share * 100)}%`).join(', '),
    r.modulators.map((m) => `${m.label}→${m.of}`).join(', '),
    r.explanation ? `${r.explanation.formula} (${fmt(r.explanation.iou, 2)}${r.explanation.basis === 'top set' ? ', top set' : ''})` : '',
  ]));
  console.log('\nConcept counts are hypotheses about the model on this probe set, not proof; check a unit before pruning or trusting it.');
}

function printUnit(u: UnitDetail): void {
  console.log(`${u.layer} unit ${u.unit}   rank ${u.rank + 1}   concept count ${fmt(u.conceptCount, 2)}   selectivity ${fmt(u.selectivity, 2)}${u.flags.length ? `   flags: ${u.flags.join(', ')}` : ''}`);
  console.log(`active on ${fmt(u.activeFraction * 100, 1)}% of probes   mean ${fmt(u.mean)}   max ${fmt(u.max)}   top-set threshold ${fmt(u.topThreshold)}`);
  if (u.explanation) {
    console.log(u.explanation.basis === 'drivers'
      ? `formula: ${u.explanation.formula}   IoU ${fmt(u.explanation.iou)} with activation > ${fmt(u.explanation.threshold)}`
      : `formula (no driver; best OR against the top set): ${u.explanation.formula}   IoU ${fmt(u.explanation.iou)}`);
  }
  console.log(`concept count ${fmt(u.conceptCount, 2)}, 90% interval ${fmt(u.conceptLow, 2)}–${fmt(u.conceptHigh, 2)} (the ranking uses ${fmt(u.conceptLow, 2)})`);
  console.log('\ndrivers (alone = with it and no other driver; none = with no driver):');
  if (u.drivers.length === 0) console.log('  (none)');
  else table(['  driver', 'share [90%]', 'AUROC', 'q', 'alone n / mean', 'with others n / mean', 'none n / mean', 'effect'], u.drivers.map((d) => [
    `  ${d.label}${d.sameAs.length ? ` (same concept as ${d.sameAs.join(', ')})` : ''}`,
    `${Math.round(d.share * 100)}% [${Math.round(d.shareLow * 100)}–${Math.round(d.shareHigh * 100)}]`, fmt(d.auroc), d.q.toExponential(2),
    `${d.alone.n} / ${fmt(d.alone.mean)}`, `${d.others.n} / ${fmt(d.others.mean)}`, `${d.none.n} / ${fmt(d.none.mean)}`, fmt(d.effect)]));
  if (u.modulators.length) {
    console.log('\nmodulators (raise a driver\'s response only; not counted):');
    table(['  label', 'of', 'AUROC', 'q', 'effect'], u.modulators.map((m) => [`  ${m.label}`, m.of, fmt(m.auroc), m.q.toExponential(2), fmt(m.effect)]));
  }
  for (const x of u.nested) console.log(`note: ${x.label} (AUROC ${fmt(x.auroc)} alone) contains ${x.within} in this probe set; its response is that of ${x.within}, so it is not a second concept.`);
  console.log('\nper label:');
  table(['  label', 'n', 'mean with', 'mean without', 'AUROC', 'cond. AUROC', 'cond. q', 'top hits', 'enrich. p', 'enrich. q'],
    [...u.stats].sort((a, b) => b.auroc - a.auroc).map((s) => [`  ${s.label}`, String(s.n1), fmt(s.meanWith), fmt(s.meanWithout), fmt(s.auroc),
      fmt(s.condAuroc), s.condQ === null ? '—' : s.condQ.toExponential(2), String(s.topHits), s.p.toExponential(2), s.q.toExponential(2)]));
  console.log('\ntop examples:');
  table(['  probe', 'activation', 'location', 'id', 'text / image'], u.topExamples.map((e) => [`  ${e.probe}`, fmt(e.value), e.location === null ? '' : String(e.location), e.id ?? '', e.text ?? e.image ?? '']));
  console.log('\nThese are statistical hypotheses about the model on this probe set, not proof.');
}

export async function main(argvIn: string[]): Promise<number> {
  // --verbose anywhere: a failure also prints the third-party text it was translated from.
  const verbose = argvIn.includes('--verbose');
  const argv = argvIn.filter((a) => a !== '--verbose');
  const [command, ...rest] = argv;
  const api = createApi();
  try {
    switch (command) {
      case 'layers': {
        const a = parse(rest, { json: { type: 'boolean' } }, 1);
        const info = await api['model.layers'](parseRequest('model.layers', { model: a.positionals[0] }));
        if (a.values.json) console.log(JSON.stringify(info, null, 1));
        else printLayers(info);
        return 0;
      }
      case 'scan':
      case 'demo': {
        const a = command === 'scan'
          ? parse(rest, { study: { type: 'string' }, layers: { type: 'string' }, batch: { type: 'string' }, pool: { type: 'string' }, chunk: { type: 'string' } }, 2)
          : parse(rest, { study: { type: 'string' }, top: { type: 'string' } }, 0);
        const model = command === 'scan' ? a.positionals[0] : demoPaths.model;
        const probes = command === 'scan' ? a.positionals[1] : demoPaths.probes;
        const study = (a.values.study as string | undefined) ?? (command === 'demo' ? 'demo.study' : undefined);
        if (!study) throw new UsageError('scan needs --study <file> (created when missing, resumed when present)');
        const req = parseRequest('scan.start', {
          model: path.resolve(model), probes: path.resolve(probes), study: path.resolve(study),
          layers: typeof a.values.layers === 'string' ? a.values.layers.split(',').map((s) => s.trim()).filter(Boolean) : undefined,
          batch: intOption(a.values.batch, 'batch'), chunkSize: intOption(a.values.chunk, 'chunk'),
          pool: a.values.pool,
        });
        const controller = new AbortController();
        const onSignal = () => controller.abort();
        process.once('SIGINT', onSignal);
        process.once('SIGTERM', onSignal);
        try {
          const r = await runScan(req, { signal: controller.signal, onProgress: progressPrinter(), onNote: (m) => process.stderr.write(`note: ${m}\n`) });
          process.stderr.write(`${r.probes} probes, ${r.layers.map((l) => `${l.name} (${l.units})`).join(', ')}; ` +
            `${r.chunksComputed} chunks computed, ${r.chunksReused} reused in ${fmt(r.extractSeconds, 1)}s; scores ${r.scoresReused ? 'reused' : `in ${fmt(r.scoreSeconds, 1)}s`}\n`);
          process.stderr.write(`study: ${r.study}\n`);
        } finally {
          process.off('SIGINT', onSignal);
          process.off('SIGTERM', onSignal);
        }
        if (command === 'demo') printRank(await api['study.rank']({ study: path.resolve(study), top: intOption(a.values.top, 'top') ?? 15 }));
        return 0;
      }
      case 'rank': {
        const a = parse(rest, { layer: { type: 'string' }, top: { type: 'string' }, json: { type: 'boolean' } }, 1);
        const rows = await api['study.rank'](parseRequest('study.rank', { study: a.positionals[0], layer: a.values.layer, top: intOption(a.values.top, 'top') }));
        if (a.values.json) console.log(JSON.stringify(rows, null, 1));
        else printRank(rows);
        return 0;
      }
      case 'unit': {
        const a = parse(rest, { json: { type: 'boolean' } }, 3);
        const unit = unitArg(a.positionals[2]);
        const u = await api['unit.detail'](parseRequest('unit.detail', { study: a.positionals[0], layer: a.positionals[1], unit }));
        if (a.values.json) console.log(JSON.stringify(u, null, 1));
        else printUnit(u);
        return 0;
      }
      case 'export': {
        const a = parse(rest, { scores: { type: 'string' }, activations: { type: 'string' }, layer: { type: 'string' } }, 1);
        const study = a.positionals[0];
        if (typeof a.values.scores === 'string') {
          const r = await api['export.scores'](parseRequest('export.scores', { study, out: a.values.scores }));
          process.stderr.write(`wrote ${r.rows} units to ${r.file}\n`);
        } else if (typeof a.values.activations === 'string') {
          if (typeof a.values.layer !== 'string') throw new UsageError('--activations needs --layer L');
          const r = await api['export.activations'](parseRequest('export.activations', { study, out: a.values.activations, layer: a.values.layer }));
          process.stderr.write(`wrote ${r.rows} × ${r.columns} float32 to ${r.file}\n`);
        } else {
          throw new UsageError('export needs --scores out.csv|out.json or --activations out.npy --layer L');
        }
        return 0;
      }
      case 'review':
        return await reviewCommand(rest, api);
      case 'report':
        return await reportCommand(rest, api);
      case 'lens':
        return await lensCommand(rest, api);
      case 'dictionary':
        return await dictionaryCommand(rest);
      case 'ablate':
        return await ablateCommand(rest, api);
      case undefined:
      case 'help':
      case '--help':
      case '-h':
        console.log(HELP);
        return command === undefined ? 2 : 0;
      default:
        throw new UsageError(`unknown command "${command}"`);
    }
  } catch (e) {
    if (e instanceof UsageError) {
      process.stderr.write(`skein ${command ?? ''}: ${e.message}. Run skein help for usage.\n`);
      return 2;
    }
    const info = toErrorInfo(e);
    const loc = [info.file, info.where].filter(Boolean).join(', ');
    process.stderr.write(`skein: ${loc ? `${loc}: ` : ''}${info.message}\n`);
    if (verbose && info.detail) process.stderr.write(`skein: the original message: ${info.detail}\n`);
    return info.code === 'cancelled' ? 130 : 1;
  }
}
