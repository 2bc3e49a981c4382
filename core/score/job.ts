import crypto from 'node:crypto';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readRun, readLayers, readUnit, doneChunks, floatsToBlob, now, type LayerRow, type RunRow } from '../store/study.ts';
import { labelNames } from '../store/queries.ts';
import { clearDriverTables, writeLayerNull, writeUnitDrivers, type DriverRecord } from '../store/drivers.ts';
import { mulberry32 } from './random.ts';
import { Progress, type ProgressReport } from '../extract/progress.ts';
import { scoreUnitPartial, finishLayer, rankUnits, buildRelatedness, defaultScoreOptions, createScratch } from './index.ts';
import type { LabelMatrix, Relatedness, ScoreOptions, UnitPartial, UnitScore } from './types.ts';
import type { ConceptRow } from '../probes/types.ts';

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
export function readLabelMatrix(db: Database.Database, run: RunRow): LabelMatrix {
  const labels = labelNames(db);
  const rows = db.prepare(`SELECT probe, label FROM probe_label ORDER BY probe, label`).raw().all() as [number, number][];
  const labelOffsets = new Int32Array(run.probeCount + 1);
  const labelIds = new Int32Array(rows.length);
  for (const [p] of rows) labelOffsets[p + 1]++;
  for (let i = 0; i < run.probeCount; i++) labelOffsets[i + 1] += labelOffsets[i];
  rows.forEach(([, l], i) => { labelIds[i] = l; });
  return { count: run.probeCount, labels, labelOffsets, labelIds };
}

export function readConcepts(db: Database.Database): ConceptRow[] | null {
  const rows = db.prepare(`SELECT label, grp, parent, description FROM concept`).all() as { label: string; grp: string; parent: string | null; description: string | null }[];
  if (rows.length === 0) return null;
  return rows.map((r) => ({ label: r.label, group: r.grp, parent: r.parent ?? undefined, description: r.description ?? undefined }));
}

/** Bumped when the scoring method changes, so stored scores of an older method are recomputed. */
const SCORE_MODEL_VERSION = 2;

/** A unit is called mixed when its concept count is at least this (the layer overview's threshold). */
export const MIXED_AT = 1.5;
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

export function isMixed(score: UnitScore): boolean {
  return score.flags.length === 0 && score.conceptCount >= MIXED_AT;
}

export interface LayerNull { unitsSampled: number; mixedSampled: number; mixedExpected: number; mixedReal: number }

function scoreKey(run: RunRow, layers: LayerRow[], opts: ScoreOptions, override: string | null): string {
  const h = crypto.createHash('sha256');
  h.update(JSON.stringify({ v: SCORE_MODEL_VERSION, m: run.modelFp, p: run.probesFp, l: layers.map((l) => [l.name, l.pool, l.units]), opts, override }));
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
  const run = readRun(db);
  if (!run) throw new SkeinError({ code: 'study', message: 'This study has no scan yet. Run skein scan first.' });
  const layers = readLayers(db);
  const chunks = Math.ceil(run.probeCount / run.chunkSize);
  for (const l of layers) {
    if (doneChunks(db, l.id).size !== chunks) {
      throw new SkeinError({ code: 'study', where: `layer ${l.name}`, message: `The scan of layer ${l.name} is incomplete. Run the scan again to finish it before scoring.` });
    }
  }
  const opts: ScoreOptions = { ...defaultScoreOptions, ...options };
  const override = db.prepare(`SELECT value FROM meta WHERE key = 'relatedness_override'`).pluck().get() as string | undefined;
  const key = scoreKey(run, layers, opts, override ?? null);
  const existing = db.prepare(`SELECT key FROM score_run WHERE id = 1`).pluck().get() as string | undefined;
  const totalUnits = layers.reduce((s, l) => s + l.units, 0);
  if (existing === key) return { reused: true, layers: layers.length, units: totalUnits, seconds: 0 };

  const labels = readLabelMatrix(db, run);
  const relatedness = buildRelatedness(labels.labels, labels, readConcepts(db), override ? JSON.parse(override) : null);
  const progress = new Progress('score', totalUnits, hooks.onProgress);
  const values = new Float32Array(run.probeCount);
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
      readUnit(db, run, layer.id, u, values);
      partials.push(scoreUnitPartial(u, values, labels, opts, scratch));
      if (sample.has(u)) nullPartials.push(scoreUnitPartial(u, values, shuffled, opts, nullScratch));
      progress.advance(1);
      yield;
    }
    const layerScores = finishLayer(partials, relatedness, opts);
    for (const score of layerScores) scored.push({ layer, score, layerOrder });
    const mixedSampled = finishLayer(nullPartials, relatedness, opts).filter(isMixed).length;
    nulls.set(layer.id, {
      unitsSampled: nullPartials.length, mixedSampled, mixedExpected: (mixedSampled / Math.max(1, nullPartials.length)) * layer.units,
      mixedReal: layerScores.filter(isMixed).length,
    });
  }
  const ranked = rankUnits(scored);
  writeScores(db, ranked, relatedness, key, opts, nulls);
  progress.finish();
  return { reused: false, layers: layers.length, units: totalUnits, seconds: (Date.now() - started) / 1000 };
}

const nullIfNaN = (x: number) => (Number.isNaN(x) ? null : x);

/** The normalised rows of one unit: drivers (by share), modulators, nested labels. */
export function driverRecords(s: UnitScore): DriverRecord[] {
  return [
    ...s.drivers.map((d): DriverRecord => ({
      kind: 'driver', labels: d.labels, of: null, share: d.share, shareLow: d.shareLow, shareHigh: d.shareHigh, auroc: d.auroc, q: d.q,
      effect: d.effect, upper: d.upper, nAlone: d.alone.n, meanAlone: d.alone.mean, nOthers: d.others.n, meanOthers: d.others.mean,
      nNone: d.none.n, meanNone: d.none.mean, sameAs: d.sameAs,
    })),
    ...s.modulators.map((m): DriverRecord => ({
      kind: 'modulator', labels: [m.label], of: m.of, share: null, shareLow: null, shareHigh: null, auroc: m.auroc, q: m.q,
      effect: m.with.mean - m.without.mean, upper: null, nAlone: m.with.n, meanAlone: m.with.mean, nOthers: null, meanOthers: null,
      nNone: m.without.n, meanNone: m.without.mean, sameAs: [],
    })),
    ...s.nested.map((x): DriverRecord => ({
      kind: 'nested', labels: [x.label], of: x.within, share: null, shareLow: null, shareHigh: null, auroc: x.auroc, q: null,
      effect: null, upper: null, nAlone: null, meanAlone: null, nOthers: null, meanOthers: null, nNone: null, meanNone: null, sameAs: [],
    })),
  ];
}

function writeScores(db: Database.Database, ranked: { layer: LayerRow; score: UnitScore }[], rel: Relatedness, key: string, opts: ScoreOptions, nulls: Map<number, LayerNull>): void {
  db.transaction(() => {
    for (const t of ['unit_label', 'unit_score', 'relatedness', 'score_run']) db.prepare(`DELETE FROM ${t}`).run();
    clearDriverTables(db);
    const insScore = db.prepare(`INSERT INTO unit_score (layer_id, unit, rank, concept_count, selectivity, evidence, flags, drivers, explanation,
      active_fraction, mean, max, top_threshold, top_probes, top_values, concept_low, concept_high) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`);
    const insLabel = db.prepare(`INSERT INTO unit_label (layer_id, unit, label, n1, mean_with, mean_without, auroc, top_hits, p, q, cond_auroc, cond_q) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`);
    ranked.forEach(({ layer, score: s }, rank) => {
      // the drivers column keeps its one-label form {label, auroc, q, share} for its readers; unit_driver has everything
      const legacy = s.drivers.map((d) => ({ label: d.label, labels: d.labels, auroc: d.auroc, q: d.q, share: d.share }));
      insScore.run(layer.id, s.unit, rank, s.conceptCount, s.selectivity, s.evidence, JSON.stringify(s.flags), JSON.stringify(legacy),
        s.explanation ? JSON.stringify(s.explanation) : null, s.activeFraction, s.mean, s.max, s.topThreshold,
        Buffer.from(s.topProbes.buffer, s.topProbes.byteOffset, s.topProbes.byteLength), floatsToBlob(s.topValues), s.conceptLow, s.conceptHigh);
      // A mean over no probes is NaN, which SQLite stores as NULL; readers map it back to null.
      s.stats.forEach((st, l) => insLabel.run(layer.id, s.unit, st.label, st.n1, nullIfNaN(st.meanWith), nullIfNaN(st.meanWithout), st.auroc, st.topHits, st.p, st.q,
        nullIfNaN(s.condAuroc[l]), Number.isNaN(s.condAuroc[l]) ? null : s.condQ[l]));
      writeUnitDrivers(db, layer.id, s.unit, driverRecords(s));
    });
    for (const [layerId, n] of nulls) writeLayerNull(db, { layerId, ...n, mixedAt: MIXED_AT, seed: NULL_SEED });
    const insRel = db.prepare(`INSERT INTO relatedness (a, b, similarity, source) VALUES (?, ?, ?, ?)`);
    const L = rel.labels.length;
    for (let a = 0; a < L; a++) for (let b = 0; b < L; b++) insRel.run(a, b, rel.matrix[a * L + b], rel.source[a * L + b]);
    db.prepare(`INSERT INTO score_run (id, key, options_json, scored_at) VALUES (1, ?, ?, ?)`).run(key, JSON.stringify(opts), now());
  })();
}
