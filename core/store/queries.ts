import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readRun, readLayers, findLayer, blobToFloats, blobToInt32, readUnitArgmax, type LayerRow, type RunRow } from './study.ts';
import { readAllDrivers, readLayerNulls, readUnitDrivers, type DriverRecord } from './drivers.ts';

/** One ranked unit as `skein rank --json` prints it (field names fixed: other tools read them). */
export interface RankRow {
  layer: string;
  unit: number;
  conceptCount: number;
  /** 90% bootstrap interval of the concept count (the ranking uses the lower end) */
  conceptLow: number;
  conceptHigh: number;
  selectivity: number;
  flags: string[];
  /** label: the driver's label, or a compound's labels joined by " & " (all present together) */
  drivers: RankDriver[];
  /** labels that raise a driver's response only; not counted as concepts */
  modulators: { label: string; of: string; auroc: number; q: number; effect: number }[];
  /** labels set aside because they (nearly) contain a driver; `within` names that driver */
  nested: { label: string; within: string; auroc: number }[];
  /** formula: "a & b | c" (& binds tighter than |); threshold: the activation it binarises the unit at (null: top set) */
  explanation: { formula: string; iou: number; threshold: number | null; basis: 'drivers' | 'top set' } | null;
}

export interface RankDriver {
  label: string;
  labels: string[];
  auroc: number; q: number; share: number; shareLow: number; shareHigh: number;
  effect: number; upper: number;
  alone: { n: number; mean: number | null }; others: { n: number; mean: number | null }; none: { n: number; mean: number | null };
  /** other drivers counted as the same concept (their probes nearly coincide) */
  sameAs: string[];
}

/** Per layer: units called mixed with the real labels and, beside it, the shuffled-label baseline. */
export interface LayerNullRow { layer: string; units: number; mixedReal: number; mixedExpected: number; unitsSampled: number; mixedSampled: number; mixedAt: number }

export interface LabelStatRow {
  /** null when no probe has (or every probe has) the label */
  label: string; n1: number; meanWith: number | null; meanWithout: number | null; auroc: number; topHits: number; p: number; q: number;
  /** conditional AUROC and its BH q in the joint model (null when the label was not a candidate) */
  condAuroc: number | null; condQ: number | null;
}

export interface TopExample {
  probe: number; value: number;
  /** Flat location of the pooled maximum (h*W+w for conv units, t for sequences); null for dense units. */
  location: number | null;
  id: string | null; text: string | null; image: string | null;
}

export interface UnitDetail extends RankRow {
  rank: number;
  evidence: number;
  activeFraction: number;
  mean: number;
  max: number;
  topThreshold: number;
  layerKind: LayerRow['kind'];
  layerDims: number[];
  stats: LabelStatRow[];
  topExamples: TopExample[];
}

export function requireScores(db: Database.Database, file?: string): void {
  const n = db.prepare(`SELECT count(*) FROM score_run`).pluck().get() as number;
  if (!n) throw new SkeinError({ code: 'study', file, message: 'This study has no scores yet. Run skein scan (it scores when extraction finishes).' });
}

export function labelNames(db: Database.Database): string[] {
  return db.prepare(`SELECT name FROM label ORDER BY id`).pluck().all() as string[];
}

/** A compound's name: its labels joined by " & ". */
export function termName(labels: number[], names: string[]): string {
  return labels.map((l) => names[l]).join(' & ');
}

/** Our formula notation: terms joined by " | ", each term's labels by " & " (& binds tighter). */
export function formula(terms: number[][], names: string[]): string {
  return terms.map((t) => termName(t, names)).join(' | ');
}

function toDrivers(records: DriverRecord[], names: string[]): Pick<RankRow, 'drivers' | 'modulators' | 'nested'> {
  const drivers: RankDriver[] = [];
  const modulators: RankRow['modulators'] = [];
  const nested: RankRow['nested'] = [];
  for (const r of records) {
    if (r.kind === 'driver') {
      drivers.push({
        label: termName(r.labels, names), labels: r.labels.map((l) => names[l]), auroc: r.auroc, q: r.q ?? 1,
        share: r.share ?? 0, shareLow: r.shareLow ?? 0, shareHigh: r.shareHigh ?? 0, effect: r.effect ?? 0, upper: r.upper ?? 0,
        alone: { n: r.nAlone ?? 0, mean: r.meanAlone }, others: { n: r.nOthers ?? 0, mean: r.meanOthers }, none: { n: r.nNone ?? 0, mean: r.meanNone },
        sameAs: r.sameAs.map((ls) => termName(ls, names)),
      });
    } else if (r.kind === 'modulator') {
      modulators.push({ label: termName(r.labels, names), of: termName(r.of ?? [], names), auroc: r.auroc, q: r.q ?? 1, effect: r.effect ?? 0 });
    } else {
      nested.push({ label: termName(r.labels, names), within: termName(r.of ?? [], names), auroc: r.auroc });
    }
  }
  return { drivers, modulators, nested };
}

/** The shuffled-label baseline beside the real count of mixed units, per layer (empty when not computed). */
export function layerNullRows(db: Database.Database): LayerNullRow[] {
  const layers = new Map(readLayers(db).map((l) => [l.id, l]));
  return readLayerNulls(db).map((r) => ({
    layer: layers.get(r.layerId)!.name, units: layers.get(r.layerId)!.units, mixedReal: r.mixedReal, mixedExpected: r.mixedExpected,
    unitsSampled: r.unitsSampled, mixedSampled: r.mixedSampled, mixedAt: r.mixedAt,
  }));
}

interface ScoreRowRaw {
  layer_id: number; unit: number; rank: number; concept_count: number; selectivity: number; evidence: number;
  flags: string; drivers: string; explanation: string | null; active_fraction: number; mean: number; max: number;
  top_threshold: number; top_probes: Buffer; top_values: Buffer; concept_low: number | null; concept_high: number | null;
}

function toRankRow(r: ScoreRowRaw, layers: Map<number, LayerRow>, names: string[], records: DriverRecord[]): RankRow {
  const ex = r.explanation ? (JSON.parse(r.explanation) as { terms: number[][]; iou: number; threshold: number | null; basis: 'drivers' | 'top set' }) : null;
  return {
    layer: layers.get(r.layer_id)!.name,
    unit: r.unit,
    conceptCount: r.concept_count,
    conceptLow: r.concept_low ?? r.concept_count,
    conceptHigh: r.concept_high ?? r.concept_count,
    selectivity: r.selectivity,
    flags: JSON.parse(r.flags),
    ...toDrivers(records, names),
    explanation: ex ? { formula: formula(ex.terms, names), iou: ex.iou, threshold: ex.threshold, basis: ex.basis } : null,
  };
}

/** Units most polysemantic first (the stored study-wide ranking). */
export function rankRows(db: Database.Database, opts: { layer?: string; top?: number; file?: string } = {}): RankRow[] {
  requireScores(db, opts.file);
  const layers = new Map(readLayers(db).map((l) => [l.id, l]));
  const names = labelNames(db);
  const layer = opts.layer ? findLayer(db, opts.layer, opts.file) : null;
  const limit = opts.top && opts.top > 0 ? opts.top : -1;
  const rows = (layer
    ? db.prepare(`SELECT * FROM unit_score WHERE layer_id = ? ORDER BY rank LIMIT ?`).all(layer.id, limit)
    : db.prepare(`SELECT * FROM unit_score ORDER BY rank LIMIT ?`).all(limit)) as ScoreRowRaw[];
  const records = readAllDrivers(db, layer?.id);
  return rows.map((r) => toRankRow(r, layers, names, records.get(`${r.layer_id}:${r.unit}`) ?? []));
}

export function unitDetail(db: Database.Database, layerName: string, unit: number, file?: string): UnitDetail {
  requireScores(db, file);
  const run = readRun(db) as RunRow;
  const layer = findLayer(db, layerName, file);
  if (!Number.isInteger(unit) || unit < 0 || unit >= layer.units) {
    throw new SkeinError({ code: 'request', file, where: `unit ${unit}`, message: `Layer ${layer.name} has units 0–${layer.units - 1}; ${unit} is out of range.` });
  }
  const names = labelNames(db);
  const r = db.prepare(`SELECT * FROM unit_score WHERE layer_id = ? AND unit = ?`).get(layer.id, unit) as ScoreRowRaw;
  const base = toRankRow(r, new Map([[layer.id, layer]]), names, readUnitDrivers(db, layer.id, unit));
  const stats = (db.prepare(`SELECT * FROM unit_label WHERE layer_id = ? AND unit = ? ORDER BY label`).all(layer.id, unit) as Record<string, number | null>[])
    .map((s) => ({ label: names[s.label as number], n1: s.n1 as number, meanWith: s.mean_with, meanWithout: s.mean_without, auroc: s.auroc as number, topHits: s.top_hits as number, p: s.p as number, q: s.q as number,
      condAuroc: s.cond_auroc ?? null, condQ: s.cond_q ?? null }));
  const probes = Array.from(blobToInt32(r.top_probes));
  const values = blobToFloats(r.top_values);
  const locations = layer.kind === 'conv' || layer.kind === 'sequence' ? readUnitArgmax(db, run, layer.id, unit, probes) : probes.map(() => null);
  const ex = db.prepare(`SELECT ext_id, text, image FROM example WHERE probe = ?`);
  const topExamples = probes.map((p, i) => {
    const e = ex.get(p) as { ext_id: string | null; text: string | null; image: string | null } | undefined;
    return { probe: p, value: values[i], location: locations[i], id: e?.ext_id ?? null, text: e?.text ?? null, image: e?.image ?? null };
  });
  return {
    ...base, rank: r.rank, evidence: r.evidence, activeFraction: r.active_fraction, mean: r.mean, max: r.max,
    topThreshold: r.top_threshold, layerKind: layer.kind, layerDims: layer.dims, stats, topExamples,
  };
}
