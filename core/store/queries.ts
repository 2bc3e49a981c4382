import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readRun, readLayers, findLayer, blobToFloats, blobToInt32, readUnitArgmax, type LayerRow, type RunRow } from './study.ts';

/** One ranked unit as `skein rank --json` prints it (field names fixed: other tools read them). */
export interface RankRow {
  layer: string;
  unit: number;
  conceptCount: number;
  selectivity: number;
  flags: string[];
  drivers: { label: string; auroc: number; q: number; share: number }[];
  explanation: { formula: string; iou: number } | null;
}

export interface LabelStatRow {
  /** null when no probe has (or every probe has) the label */
  label: string; n1: number; meanWith: number | null; meanWithout: number | null; auroc: number; topHits: number; p: number; q: number;
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

export function formula(labels: number[], names: string[]): string {
  return labels.map((l) => names[l]).join(' OR ');
}

interface ScoreRowRaw {
  layer_id: number; unit: number; rank: number; concept_count: number; selectivity: number; evidence: number;
  flags: string; drivers: string; explanation: string | null; active_fraction: number; mean: number; max: number;
  top_threshold: number; top_probes: Buffer; top_values: Buffer;
}

function toRankRow(r: ScoreRowRaw, layers: Map<number, LayerRow>, names: string[]): RankRow {
  const drivers = JSON.parse(r.drivers) as { label: number; auroc: number; q: number; share: number }[];
  const ex = r.explanation ? (JSON.parse(r.explanation) as { labels: number[]; iou: number }) : null;
  return {
    layer: layers.get(r.layer_id)!.name,
    unit: r.unit,
    conceptCount: r.concept_count,
    selectivity: r.selectivity,
    flags: JSON.parse(r.flags),
    drivers: drivers.map((d) => ({ label: names[d.label], auroc: d.auroc, q: d.q, share: d.share })),
    explanation: ex ? { formula: formula(ex.labels, names), iou: ex.iou } : null,
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
  return rows.map((r) => toRankRow(r, layers, names));
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
  const base = toRankRow(r, new Map([[layer.id, layer]]), names);
  const stats = (db.prepare(`SELECT * FROM unit_label WHERE layer_id = ? AND unit = ? ORDER BY label`).all(layer.id, unit) as Record<string, number | null>[])
    .map((s) => ({ label: names[s.label as number], n1: s.n1 as number, meanWith: s.mean_with, meanWithout: s.mean_without, auroc: s.auroc as number, topHits: s.top_hits as number, p: s.p as number, q: s.q as number }));
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
