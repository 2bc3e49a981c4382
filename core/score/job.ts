import crypto from 'node:crypto';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readBinding, readLayers, labelNames, readProbeLabels, readConcepts, readRelatednessOverride, type LayerRow, type StudyBinding } from '../store/binding.ts';
import { readUnit, doneChunks } from '../store/activations.ts';
import { readScoreKey, writeScores } from '../store/scores.ts';
import { Progress, type ProgressReport } from '../extract/progress.ts';
import { scoreUnitPartial, finishLayer, rankUnits, buildRelatedness, defaultScoreOptions, createScratch } from './index.ts';
import type { LabelMatrix, ScoreOptions, UnitScore } from './types.ts';

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

function scoreKey(binding: StudyBinding, layers: LayerRow[], opts: ScoreOptions, override: string | null): string {
  const h = crypto.createHash('sha256');
  h.update(JSON.stringify({ m: binding.modelFp, p: binding.probesFp, l: layers.map((l) => [l.name, l.pool, l.units]), opts, override }));
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
  for (const [layerOrder, layer] of layers.entries()) {
    const partials = [];
    for (let u = 0; u < layer.units; u++) {
      if (hooks.signal?.aborted) throw new SkeinError({ code: 'cancelled', message: 'Scoring cancelled; the cached activations are kept. Run it again to score.' });
      readUnit(db, binding, layer.id, u, values);
      partials.push(scoreUnitPartial(u, values, labels, opts, scratch));
      progress.advance(1);
      yield;
    }
    for (const score of finishLayer(partials, relatedness, opts)) scored.push({ layer, score, layerOrder });
  }
  const ranked = rankUnits(scored);
  writeScores(db, ranked, relatedness, key, opts);
  progress.finish();
  return { reused: false, layers: layers.length, units: totalUnits, seconds: (Date.now() - started) / 1000 };
}
