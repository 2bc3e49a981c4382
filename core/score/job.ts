import crypto from 'node:crypto';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readBinding, readLayers, labelNames, readProbeLabels, readConcepts, readRelatednessOverride, type LayerRow, type StudyBinding } from '../store/binding.ts';
import { readUnit, doneChunks } from '../store/activations.ts';
import { readScoreKey, writeScores } from '../store/scores.ts';
import { Progress, type ProgressReport } from '../extract/progress.ts';
import { scoreUnitPartial, finishLayer, rankUnits, buildRelatedness, defaultScoreOptions, createScratch } from './index.ts';
import type { LabelMatrix, ScoreOptions, UnitPartial, UnitScore } from './types.ts';
import { mulberry32 } from '../random.ts';
import { classifyUnit } from './kind.ts';

export interface ScoreJobHooks {
  onProgress?: (p: ProgressReport) => void;
  signal?: AbortSignal;
}

export interface ScoreSummary {
  reused: boolean;
  layers: number;
  units: number;
  seconds: number;
}

/** The probe labels as stored in the study, in the CSR form the statistics take. */
export function readLabelMatrix(db: Database.Database, binding: StudyBinding): LabelMatrix {
  return { count: binding.probeCount, labels: labelNames(db), ...readProbeLabels(db, binding.probeCount) };
}

/** Bumped when the scoring method changes, so stored scores of an older method are recomputed. */
const SCORE_MODEL_VERSION = 2;

/** Units per layer scored again with shuffled labels for the null baseline (all units when the layer is smaller). */
export const NULL_UNITS = 64;
export const NULL_SEED = 20240917;

/** The probe labels moved to other probes by one seeded permutation (the shuffled-label null keeps label counts and co-occurrence). */
export function shuffledLabels(labels: LabelMatrix, seed: number): LabelMatrix {
  const n = labels.count;
  const perm = Int32Array.from({ length: n }, (_, i) => i);
  const random = mulberry32(seed);
  for (let i = n - 1; i > 0; i--) { // Fisher–Yates (Knuth, TAOCP vol. 2, Algorithm P)
    const j = Math.floor(random() * (i + 1));
    const t = perm[i]; perm[i] = perm[j]; perm[j] = t;
  }
  const offsets = new Int32Array(n + 1);
  for (let i = 0; i < n; i++) offsets[i + 1] = offsets[i] + labels.labelOffsets[perm[i] + 1] - labels.labelOffsets[perm[i]];
  const ids = new Int32Array(offsets[n]);
  for (let i = 0; i < n; i++) ids.set(labels.labelIds.subarray(labels.labelOffsets[perm[i]], labels.labelOffsets[perm[i] + 1]), offsets[i]);
  return { count: n, labels: labels.labels, labelOffsets: offsets, labelIds: ids };
}

/** Which units of a layer the null rescores: an evenly spaced sample of NULL_UNITS (all when fewer). */
export function nullSample(units: number): Set<number> {
  const take = Math.min(units, NULL_UNITS);
  return new Set(Array.from({ length: take }, (_, i) => Math.floor((i * units) / take)));
}

/** Mixed as the screens classify it (core/score/kind.ts). */
export function isMixed(score: UnitScore, polysemanticAt: number): boolean {
  return classifyUnit({ dead: score.flags.includes('dead'), dense: score.flags.includes('dense'), conceptCount: score.conceptCount }, polysemanticAt) === 'mixed';
}

export interface LayerNull { unitsSampled: number; mixedSampled: number; mixedExpected: number; mixedReal: number }

function scoreKey(binding: StudyBinding, layers: LayerRow[], opts: ScoreOptions, override: string | null): string {
  const h = crypto.createHash('sha256');
  h.update(JSON.stringify({ v: SCORE_MODEL_VERSION, m: binding.modelFp, p: binding.probesFp, l: layers.map((l) => [l.name, l.pool, l.units]), opts, override }));
  return h.digest('hex');
}

/**
 * Scores every layer of the study out of core: one unit's activations in memory at a time (N floats), the per-unit
 * partial statistics kept per layer, then Benjamini–Hochberg and the rest across the layer, then one ranking across
 * the study. Reuses the stored scores when nothing they depend on changed.
 */
export function scoreStudy(db: Database.Database, options: Partial<ScoreOptions> = {}, hooks: ScoreJobHooks = {}): ScoreSummary {
  const steps = scoreSteps(db, options, hooks);
  for (;;) {
    const r = steps.next();
    if (r.done) return r.value;
  }
}

/**
 * The same job for a process that must keep answering while it scores (the app's API host): it yields to the event
 * loop every ~50 ms, so progress polls and cancel requests are served during scoring.
 */
export async function scoreStudyAsync(db: Database.Database, options: Partial<ScoreOptions> = {}, hooks: ScoreJobHooks = {}): Promise<ScoreSummary> {
  const steps = scoreSteps(db, options, hooks);
  let slice = Date.now();
  for (;;) {
    const r = steps.next();
    if (r.done) return r.value;
    if (Date.now() - slice > 50) {
      await new Promise((resolve) => setImmediate(resolve));
      slice = Date.now();
    }
  }
}

/** The scoring job as steps: it yields after each unit. */
function* scoreSteps(db: Database.Database, options: Partial<ScoreOptions>, hooks: ScoreJobHooks): Generator<void, ScoreSummary> {
  const started = Date.now();
  const binding = readBinding(db);
  if (!binding) throw new SkeinError({ code: 'study', message: 'This study has no scan yet. Run skein scan first.' });
  const layers = readLayers(db);
  const chunks = Math.ceil(binding.probeCount / binding.chunkSize);
  for (const l of layers) {
    if (doneChunks(db, l.id).size !== chunks) {
      throw new SkeinError({ code: 'study', where: `layer ${l.name}`, message: `The scan of layer ${l.name} is incomplete. Run the scan again to finish it before scoring.` });
    }
  }
  const opts: ScoreOptions = { ...defaultScoreOptions, ...options };
  const override = readRelatednessOverride(db);
  // The key hashes the override as stored (its JSON text), as it always has, so existing scores stay reusable.
  const key = scoreKey(binding, layers, opts, override ? JSON.stringify(override) : null);
  const existing = readScoreKey(db);
  const totalUnits = layers.reduce((s, l) => s + l.units, 0);
  if (existing === key) return { reused: true, layers: layers.length, units: totalUnits, seconds: 0 };

  const labels = readLabelMatrix(db, binding);
  const relatedness = buildRelatedness(labels.labels, labels, readConcepts(db), override);
  const progress = new Progress('score', totalUnits, hooks.onProgress);
  const values = new Float32Array(binding.probeCount);
  // One scratch for the study: label counts and N-sized buffers are built once, not per unit.
  const scratch = createScratch(labels);
  const scored: { layer: LayerRow; score: UnitScore; layerOrder: number }[] = [];
  const shuffled = shuffledLabels(labels, NULL_SEED);
  const nullScratch = createScratch(shuffled);
  const nulls = new Map<number, LayerNull>();
  for (const [layerOrder, layer] of layers.entries()) {
    const partials = [];
    const nullPartials: UnitPartial[] = [];
    const sample = nullSample(layer.units);
    for (let u = 0; u < layer.units; u++) {
      if (hooks.signal?.aborted) throw new SkeinError({ code: 'cancelled', message: 'Scoring cancelled; the cached activations are kept. Run it again to score.' });
      readUnit(db, binding, layer.id, u, values);
      partials.push(scoreUnitPartial(u, values, labels, opts, scratch));
      // the shuffled-label null reuses the unit's activations (labels moved to other probes by one permutation)
      if (sample.has(u)) nullPartials.push(scoreUnitPartial(u, values, shuffled, opts, nullScratch));
      progress.advance(1);
      yield;
    }
    const layerScores = finishLayer(partials, relatedness, opts);
    for (const score of layerScores) scored.push({ layer, score, layerOrder });
    const mixedSampled = finishLayer(nullPartials, relatedness, opts).filter((x) => isMixed(x, opts.polysemanticAt)).length;
    nulls.set(layer.id, {
      unitsSampled: nullPartials.length, mixedSampled, mixedExpected: (mixedSampled / Math.max(1, nullPartials.length)) * layer.units,
      mixedReal: layerScores.filter((x) => isMixed(x, opts.polysemanticAt)).length,
    });
  }
  const ranked = rankUnits(scored);
  writeScores(db, ranked, relatedness, key, opts, [...nulls].map(([layerId, n]) => ({ layerId, ...n, mixedAt: opts.polysemanticAt, seed: NULL_SEED })));
  progress.finish();
  return { reused: false, layers: layers.length, units: totalUnits, seconds: (Date.now() - started) / 1000 };
}
