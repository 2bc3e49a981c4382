/**
 * `skein dictionary train|show <study> --layer L`: a sparse dictionary (TopK sparse autoencoder) learned on a layer's
 * cached activations, from the command line (progress on stderr, Ctrl-C cancels and keeps the last saved epoch).
 * It opens the study through core/store directly: the dictionary has no API requests yet.
 */
import { layerDictionary, storedDictionary, type LayerDictionary } from '../dictionary/job.ts';
import { defaultDictionaryOptions, type DictionaryOptions } from '../dictionary/train.ts';
import { openStudyDb } from '../store/study.ts';
import { SkeinError } from '../errors.ts';
import { UsageError, intOption, parse } from './args.ts';

export const DICTIONARY_HELP = `  skein dictionary train <study> --layer L [--expansion 4] [--k 32] [--epochs 10] [--batch 256] [--lr 0.005] [--seed 1] [--json]
                                  learn a TopK sparse dictionary of the layer's own features (resumes a cancelled run)
  skein dictionary show <study> --layer L [--json]
                                  the stored dictionary's figures: variance explained, mean L0, dead and dense features`;

export const DICTIONARY_CAUTION = 'Features are directions a sparse autoencoder found useful to reconstruct this layer on these probes: hypotheses about the model, not proof of what it computes.';

function view(r: LayerDictionary) {
  return {
    layer: r.layer, units: r.sae.units, features: r.sae.features, k: r.sae.k, options: r.options,
    varianceExplained: r.metrics.varianceExplained, meanL0: r.metrics.meanL0, deadFraction: r.metrics.deadFraction,
    denseFraction: r.metrics.denseFraction, denseAbove: r.metrics.denseAbove, probes: r.metrics.probes,
    lossPerEpoch: r.losses, reused: r.reused, resumedFromEpoch: r.resumedFromEpoch, caution: DICTIONARY_CAUTION,
  };
}

function print(v: ReturnType<typeof view>): void {
  console.log(`${v.layer}: ${v.features} features on ${v.units} units (×${v.options.expansion}), top-${v.k}, ${v.options.epochs} epochs, seed ${v.options.seed}${v.reused ? ', stored' : v.resumedFromEpoch ? `, resumed from epoch ${v.resumedFromEpoch}` : ''}`);
  console.log(`  variance explained ${v.varianceExplained.toFixed(3)}   mean L0 ${v.meanL0.toFixed(2)}   dead ${(100 * v.deadFraction).toFixed(1)} %   dense (> ${100 * v.denseAbove} % of probes) ${(100 * v.denseFraction).toFixed(1)} %`);
  console.log(`  loss per epoch ${v.lossPerEpoch.map((l) => l.toFixed(4)).join(' ')}`);
  console.log(`\n${v.caution}`);
}

function numberOption(v: unknown, name: string): number | undefined {
  if (v === undefined) return undefined;
  const n = Number(v);
  if (!Number.isFinite(n) || n <= 0) throw new UsageError(`--${name} needs a positive number, got "${v}"`);
  return n;
}

export async function dictionaryCommand(argv: string[]): Promise<number> {
  const [sub, ...rest] = argv;
  if (sub !== 'train' && sub !== 'show') throw new UsageError('dictionary needs train or show: skein dictionary train <study> --layer L');
  const p = parse(rest, {
    layer: { type: 'string' }, json: { type: 'boolean' }, expansion: { type: 'string' }, k: { type: 'string' },
    epochs: { type: 'string' }, batch: { type: 'string' }, lr: { type: 'string' }, seed: { type: 'string' },
  }, 1);
  if (typeof p.values.layer !== 'string') throw new UsageError('dictionary needs --layer L');
  const file = p.positionals[0];
  const options: Partial<DictionaryOptions> = {};
  const set = <K extends keyof DictionaryOptions>(k: K, v: DictionaryOptions[K] | undefined) => { if (v !== undefined) options[k] = v; };
  set('expansion', numberOption(p.values.expansion, 'expansion'));
  set('k', intOption(p.values.k, 'k'));
  set('epochs', intOption(p.values.epochs, 'epochs'));
  set('batch', intOption(p.values.batch, 'batch'));
  set('lr', numberOption(p.values.lr, 'lr'));
  set('seed', intOption(p.values.seed, 'seed'));
  const db = openStudyDb(file);
  try {
    let result: LayerDictionary;
    if (sub === 'show') {
      const s = storedDictionary(db, p.values.layer, file);
      if (!s) throw new SkeinError({ code: 'request', file, where: `layer ${p.values.layer}`, message: `No finished dictionary for this layer yet. Train one: skein dictionary train ${file} --layer ${p.values.layer}` });
      result = s;
    } else {
      const controller = new AbortController();
      const cancel = () => controller.abort();
      process.once('SIGINT', cancel);
      process.once('SIGTERM', cancel);
      try {
        result = await layerDictionary(db, p.values.layer, { ...defaultDictionaryOptions, ...options }, {
          signal: controller.signal,
          onProgress: (q) => { if (process.stderr.isTTY) process.stderr.write(`\rdictionary ${p.values.layer}: ${q.done}/${q.total}${q.etaSeconds === null ? '' : ` eta ${Math.ceil(q.etaSeconds)}s`}   `); },
        }, file);
        if (process.stderr.isTTY) process.stderr.write('\n');
      } finally {
        process.off('SIGINT', cancel);
        process.off('SIGTERM', cancel);
      }
    }
    const v = view(result);
    if (p.values.json) console.log(JSON.stringify(v, null, 1));
    else print(v);
    return 0;
  } finally {
    db.close();
  }
}
