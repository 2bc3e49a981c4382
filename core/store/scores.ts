/**
 * The scores repository: `unit_score` (one row per unit: concept count, flags, drivers, top probes), `unit_label`
 * (per unit × label statistics), `relatedness` and `score_run` (the key and options the scores were made with).
 * The only code that reads or writes those tables, and the only decoder of each column.
 */
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import type { Driver, Relatedness, ScoreOptions, UnitScore } from '../score/types.ts';
import { blobToFloats, blobToInt32, floatsToBlob, now } from './study.ts';
import type { LayerRow } from './binding.ts';
import { clearDriverTables, writeLayerNull, writeUnitDrivers, type DriverRecord, type LayerNullRecord } from './drivers.ts';

/** Every table the scores occupy: emptied together before a new set is written. */
const SCORE_TABLES = ['unit_label', 'unit_score', 'relatedness', 'score_run'] as const;

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

/** Replaces the study's scores with a new ranked set in one transaction (rank = position in `ranked`). */
export function writeScores(db: Database.Database, ranked: { layer: LayerRow; score: UnitScore }[], rel: Relatedness, key: string, opts: ScoreOptions, nulls: LayerNullRecord[] = []): void {
  db.transaction(() => {
    for (const t of SCORE_TABLES) db.prepare(`DELETE FROM ${t}`).run();
    clearDriverTables(db);
    const insScore = db.prepare(`INSERT INTO unit_score (layer_id, unit, rank, concept_count, selectivity, evidence, dead, dense, drivers, explanation,
      active_fraction, mean, max, top_threshold, top_probes, top_values, concept_low, concept_high) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`);
    const insLabel = db.prepare(`INSERT INTO unit_label (layer_id, unit, label, n1, mean_with, mean_without, auroc, top_hits, p, q, cond_auroc, cond_q) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`);
    ranked.forEach(({ layer, score: s }, rank) => {
      // the drivers column keeps its one-label form {label, auroc, q, share} plus `labels`; unit_driver has everything
      const compact = s.drivers.map((d) => ({ label: d.label, labels: d.labels, auroc: d.auroc, q: d.q, share: d.share }));
      insScore.run(layer.id, s.unit, rank, s.conceptCount, s.selectivity, s.evidence, s.flags.includes('dead') ? 1 : 0, s.flags.includes('dense') ? 1 : 0,
        JSON.stringify(compact), s.explanation ? JSON.stringify(s.explanation) : null, s.activeFraction, s.mean, s.max, s.topThreshold,
        Buffer.from(s.topProbes.buffer, s.topProbes.byteOffset, s.topProbes.byteLength), floatsToBlob(s.topValues), s.conceptLow, s.conceptHigh);
      // A mean over no probes is NaN, which SQLite stores as NULL; readers map it back to null.
      s.stats.forEach((st, l) => insLabel.run(layer.id, s.unit, st.label, st.n1, nullIfNaN(st.meanWith), nullIfNaN(st.meanWithout), st.auroc, st.topHits, st.p, st.q,
        nullIfNaN(s.condAuroc[l]), Number.isNaN(s.condAuroc[l]) ? null : s.condQ[l]));
      writeUnitDrivers(db, layer.id, s.unit, driverRecords(s));
    });
    for (const n of nulls) writeLayerNull(db, n);
    const insRel = db.prepare(`INSERT INTO relatedness (a, b, similarity, source) VALUES (?, ?, ?, ?)`);
    const L = rel.labels.length;
    for (let a = 0; a < L; a++) for (let b = 0; b < L; b++) insRel.run(a, b, rel.matrix[a * L + b], rel.source[a * L + b]);
    db.prepare(`INSERT INTO score_run (id, key, options_json, scored_at) VALUES (1, ?, ?, ?)`).run(key, JSON.stringify(opts), now());
  })();
}

/** Forgets the stored scores (the next scoring job recomputes them). */
export function clearScores(db: Database.Database): void {
  db.transaction(() => {
    for (const t of SCORE_TABLES) db.prepare(`DELETE FROM ${t}`).run();
    clearDriverTables(db);
  })();
}

/** The key the stored scores were computed under, or null when there are none. */
export function readScoreKey(db: Database.Database): string | null {
  return (db.prepare(`SELECT key FROM score_run WHERE id = 1`).pluck().get() as string | undefined) ?? null;
}

/** The options the stored scores were computed with (as stored: a study scored by an older Skein may lack newer ones). */
export function readScoreOptions(db: Database.Database): Partial<ScoreOptions> | null {
  const json = db.prepare(`SELECT options_json FROM score_run WHERE id = 1`).pluck().get() as string | undefined;
  return json ? (JSON.parse(json) as Partial<ScoreOptions>) : null;
}

export function hasScores(db: Database.Database): boolean {
  return (db.prepare(`SELECT count(*) FROM score_run`).pluck().get() as number) > 0;
}

export function requireScores(db: Database.Database, file?: string): void {
  if (!hasScores(db)) throw new SkeinError({ code: 'study', file, message: 'This study has no scores yet. Run skein scan (it scores when extraction finishes).' });
}

/** A stored unit score with label ids (names are the caller's business). */
export interface StoredUnitScore {
  layerId: number; unit: number; rank: number;
  conceptCount: number; selectivity: number; evidence: number;
  dead: boolean; dense: boolean;
  /** Largest share first. */
  drivers: Driver[];
  /** formula: OR over terms, each an AND of labels (see UnitFormula) */
  explanation: { terms: number[][]; iou: number; threshold: number | null; basis: 'drivers' | 'top set' } | null;
  /** 90% bootstrap interval of the concept count (equal to it for scores without one) */
  conceptLow: number; conceptHigh: number;
  activeFraction: number; mean: number; max: number; topThreshold: number;
  topProbes: Int32Array; topValues: Float32Array;
}

interface ScoreRowRaw {
  layer_id: number; unit: number; rank: number; concept_count: number; selectivity: number; evidence: number;
  dead: number; dense: number; drivers: string; explanation: string | null; active_fraction: number; mean: number; max: number;
  top_threshold: number; top_probes: Buffer; top_values: Buffer; concept_low: number | null; concept_high: number | null;
}

function decodeScore(r: ScoreRowRaw): StoredUnitScore {
  return {
    layerId: r.layer_id, unit: r.unit, rank: r.rank, conceptCount: r.concept_count, selectivity: r.selectivity, evidence: r.evidence,
    dead: r.dead === 1, dense: r.dense === 1, drivers: JSON.parse(r.drivers),
    explanation: r.explanation ? JSON.parse(r.explanation) : null,
    conceptLow: r.concept_low ?? r.concept_count, conceptHigh: r.concept_high ?? r.concept_count,
    activeFraction: r.active_fraction, mean: r.mean, max: r.max, topThreshold: r.top_threshold,
    topProbes: blobToInt32(r.top_probes), topValues: blobToFloats(r.top_values),
  };
}

/** Stored unit scores in rank order: all, one layer's, and at most `limit` (all when absent). */
export function readUnitScores(db: Database.Database, opts: { layerId?: number; limit?: number } = {}): StoredUnitScore[] {
  const limit = opts.limit && opts.limit > 0 ? opts.limit : -1;
  const rows = (opts.layerId !== undefined
    ? db.prepare(`SELECT * FROM unit_score WHERE layer_id = ? ORDER BY rank LIMIT ?`).all(opts.layerId, limit)
    : db.prepare(`SELECT * FROM unit_score ORDER BY rank LIMIT ?`).all(limit)) as ScoreRowRaw[];
  return rows.map(decodeScore);
}

/** One unit's stored score (the unit must be scored). */
export function readUnitScore(db: Database.Database, layerId: number, unit: number): StoredUnitScore {
  const r = db.prepare(`SELECT * FROM unit_score WHERE layer_id = ? AND unit = ?`).get(layerId, unit) as ScoreRowRaw | undefined;
  if (!r) throw new SkeinError({ code: 'study', where: `layer ${layerId} unit ${unit}`, message: 'This unit has no score; run the scan again to score it.' });
  return decodeScore(r);
}

/** The compact per-unit summary the unit table shows, in rank order (no top probes: 10^5 rows stay small). */
export interface UnitSummary { layerId: number; unit: number; rank: number; conceptCount: number; selectivity: number; dead: boolean; dense: boolean; drivers: Driver[] }

export function* readUnitSummaries(db: Database.Database): Generator<UnitSummary> {
  const rows = db.prepare(`SELECT layer_id, unit, rank, concept_count, selectivity, dead, dense, drivers FROM unit_score ORDER BY rank`).raw().iterate() as
    IterableIterator<[number, number, number, number, number, number, number, string]>;
  for (const [layerId, unit, rank, conceptCount, selectivity, dead, dense, drivers] of rows) {
    yield { layerId, unit, rank, conceptCount, selectivity, dead: dead === 1, dense: dense === 1, drivers: JSON.parse(drivers) };
  }
}

/** One unit's summary, or null when it is not scored. */
export function readUnitSummary(db: Database.Database, layerId: number, unit: number): UnitSummary | null {
  const r = db.prepare(`SELECT layer_id, unit, rank, concept_count, selectivity, dead, dense, drivers FROM unit_score WHERE layer_id = ? AND unit = ?`).raw()
    .get(layerId, unit) as [number, number, number, number, number, number, number, string] | undefined;
  if (!r) return null;
  const [, , rank, conceptCount, selectivity, dead, dense, drivers] = r;
  return { layerId, unit, rank, conceptCount, selectivity, dead: dead === 1, dense: dense === 1, drivers: JSON.parse(drivers) };
}

/** Units whose drivers include `label`, with that label's AUROC and q. */
export function readUnitsDrivenBy(db: Database.Database, label: number): (UnitSummary & { auroc: number; q: number })[] {
  const rows = db.prepare(`SELECT s.layer_id, s.unit, s.rank, s.concept_count, s.selectivity, s.dead, s.dense, s.drivers, l.auroc, l.q FROM unit_score s
      JOIN unit_label l ON l.layer_id = s.layer_id AND l.unit = s.unit AND l.label = ?
      WHERE EXISTS (SELECT 1 FROM json_each(s.drivers) j WHERE json_extract(j.value, '$.label') = ?)`).raw().all(label, label) as
      [number, number, number, number, number, number, number, string, number, number][];
  return rows.map(([layerId, unit, rank, conceptCount, selectivity, dead, dense, drivers, auroc, q]) => ({
    layerId, unit, rank, conceptCount, selectivity, dead: dead === 1, dense: dense === 1, drivers: JSON.parse(drivers), auroc, q,
  }));
}

export function scoredUnitCount(db: Database.Database): number {
  return db.prepare(`SELECT count(*) FROM unit_score`).pluck().get() as number;
}

/** Rank of a unit named by layer name, or null when it is not scored. */
export function rankOfUnit(db: Database.Database, layerName: string, unit: number): number | null {
  return (db.prepare(`SELECT s.rank FROM unit_score s JOIN layer l ON l.id = s.layer_id WHERE l.name = ? AND s.unit = ?`).pluck().get(layerName, unit) as number | undefined) ?? null;
}

/** A stored per unit × label statistic; means over no probes are null. */
export interface StoredLabelStat {
  label: number; n1: number; meanWith: number | null; meanWithout: number | null; auroc: number; topHits: number; p: number; q: number;
  /** conditional AUROC and its BH q in the joint model; null when the label was not a candidate */
  condAuroc: number | null; condQ: number | null;
}

/** One unit's statistics for every label, by label id. */
export function readLabelStats(db: Database.Database, layerId: number, unit: number): StoredLabelStat[] {
  return (db.prepare(`SELECT label, n1, mean_with, mean_without, auroc, top_hits, p, q, cond_auroc, cond_q FROM unit_label WHERE layer_id = ? AND unit = ? ORDER BY label`).raw()
    .all(layerId, unit) as [number, number, number | null, number | null, number, number, number, number, number | null, number | null][])
    .map(([label, n1, meanWith, meanWithout, auroc, topHits, p, q, condAuroc, condQ]) => ({ label, n1, meanWith, meanWithout, auroc, topHits, p, q, condAuroc, condQ }));
}

/** One unit's AUROC per label, highest first. */
export function readLabelAurocs(db: Database.Database, layerId: number, unit: number): [label: number, auroc: number][] {
  return db.prepare(`SELECT label, auroc FROM unit_label WHERE layer_id = ? AND unit = ? ORDER BY auroc DESC`).raw().all(layerId, unit) as [number, number][];
}

/** Every unit's statistics for one label, highest AUROC first (iterate: stop when you have enough). */
export function* unitsByAuroc(db: Database.Database, label: number): Generator<{ layerId: number; unit: number; auroc: number; q: number; topHits: number }> {
  const rows = db.prepare(`SELECT layer_id, unit, auroc, q, top_hits FROM unit_label WHERE label = ? ORDER BY auroc DESC`).raw().iterate(label) as IterableIterator<[number, number, number, number, number]>;
  for (const [layerId, unit, auroc, q, topHits] of rows) yield { layerId, unit, auroc, q, topHits };
}
