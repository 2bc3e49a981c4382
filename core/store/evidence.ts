/**
 * Reads behind the unit page's evidence panel: which probes carry a label, the display data of chosen probes, and a
 * unit's neighbours in the stored ranking. Read-only.
 */
import type Database from 'better-sqlite3';

/** Probe indices carrying label `labelId`, ascending. */
export function probesOfLabel(db: Database.Database, labelId: number): Int32Array {
  return Int32Array.from(db.prepare(`SELECT probe FROM probe_label WHERE label = ? ORDER BY probe`).pluck().all(labelId) as number[]);
}

export interface ProbeDisplay { probe: number; id: string | null; text: string | null; image: string | null }

/** The example row (external id, text, image path) of each given probe, in the given order. */
export function probeDisplays(db: Database.Database, probes: number[]): ProbeDisplay[] {
  const stmt = db.prepare(`SELECT ext_id, text, image FROM example WHERE probe = ?`);
  return probes.map((probe) => {
    const e = stmt.get(probe) as { ext_id: string | null; text: string | null; image: string | null } | undefined;
    return { probe, id: e?.ext_id ?? null, text: e?.text ?? null, image: e?.image ?? null };
  });
}

export interface RankNeighbour { layer: string; unit: number; rank: number; conceptCount: number; conceptLow: number; evidence: number; flagged: boolean }

/** The units ranked just above and just below position `rank`, and how many units are ranked in all. */
export function rankNeighbours(db: Database.Database, rank: number): { total: number; above: RankNeighbour | null; below: RankNeighbour | null } {
  const low = hasColumn(db, 'unit_score', 'concept_low') ? 'coalesce(s.concept_low, s.concept_count)' : 's.concept_count';
  const stmt = db.prepare(`SELECT l.name AS layer, s.unit, s.rank, s.concept_count AS conceptCount, ${low} AS conceptLow, s.evidence, s.dead, s.dense
      FROM unit_score s JOIN layer l ON l.id = s.layer_id WHERE s.rank = ?`);
  const at = (r: number): RankNeighbour | null => {
    if (r < 0) return null;
    const row = stmt.get(r) as (Omit<RankNeighbour, 'flagged'> & { dead: number; dense: number }) | undefined;
    if (!row) return null;
    const { dead, dense, ...rest } = row;
    return { ...rest, flagged: dead === 1 || dense === 1 };
  };
  return { total: db.prepare(`SELECT count(*) FROM unit_score`).pluck().get() as number, above: at(rank - 1), below: at(rank + 1) };
}

/*
 * The joint driver model's stored extras (concept-count intervals, share intervals, modulators, nested labels, the
 * shuffled-label baseline) live in `unit_score.concept_low/high`, `unit_driver` and `layer_null`, which the joint
 * model's migration adds. Studies scored before it have none: each reader below returns null / empty for them, so the
 * screens show the extras exactly when the scores carry them.
 */

function hasTable(db: Database.Database, table: string): boolean {
  return !!db.prepare(`SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?`).get(table);
}

function hasColumn(db: Database.Database, table: string, column: string): boolean {
  return (db.prepare(`SELECT name FROM pragma_table_info(?)`).pluck().all(table) as string[]).includes(column);
}

/** Each scored unit's 90% concept-count interval, keyed `${layerId}:${unit}`; null when the scores carry none. */
export function readConceptIntervals(db: Database.Database): Map<string, { low: number; high: number }> | null {
  if (!hasColumn(db, 'unit_score', 'concept_low')) return null;
  const out = new Map<string, { low: number; high: number }>();
  for (const [layerId, unit, low, high] of db.prepare(`SELECT layer_id, unit, concept_low, concept_high FROM unit_score WHERE concept_low IS NOT NULL`).raw().iterate() as IterableIterator<[number, number, number, number]>) {
    out.set(`${layerId}:${unit}`, { low, high });
  }
  return out;
}

export interface JointDriverRow { labels: number[]; share: number | null; shareLow: number | null; shareHigh: number | null; sameAs: number[][] }
export interface JointModulatorRow { label: number[]; of: number[]; auroc: number; q: number | null; effect: number | null }
export interface JointNestedRow { label: number[]; within: number[]; auroc: number }
export interface JointExtras { drivers: JointDriverRow[]; modulators: JointModulatorRow[]; nested: JointNestedRow[] }

/** One unit's rows of the normalised driver table in stored order, split by kind; null when the study has no such table. */
export function readJointExtras(db: Database.Database, layerId: number, unit: number): JointExtras | null {
  if (!hasTable(db, 'unit_driver')) return null;
  const rows = db.prepare(`SELECT kind, labels, of_labels, share, share_low, share_high, auroc, q, effect, same_as FROM unit_driver
      WHERE layer_id = ? AND unit = ? ORDER BY position`).all(layerId, unit) as {
    kind: string; labels: string; of_labels: string | null; share: number | null; share_low: number | null; share_high: number | null;
    auroc: number; q: number | null; effect: number | null; same_as: string | null;
  }[];
  const out: JointExtras = { drivers: [], modulators: [], nested: [] };
  for (const r of rows) {
    const labels = JSON.parse(r.labels) as number[];
    const of = r.of_labels ? (JSON.parse(r.of_labels) as number[]) : [];
    if (r.kind === 'driver') out.drivers.push({ labels, share: r.share, shareLow: r.share_low, shareHigh: r.share_high, sameAs: r.same_as ? JSON.parse(r.same_as) : [] });
    else if (r.kind === 'modulator') out.modulators.push({ label: labels, of, auroc: r.auroc, q: r.q, effect: r.effect });
    else if (r.kind === 'nested') out.nested.push({ label: labels, within: of, auroc: r.auroc });
  }
  return out;
}

export interface LayerBaselineRow { layerId: number; unitsSampled: number; mixedSampled: number; mixedExpected: number }

/** The shuffled-label baseline per layer; empty when the scores carry none. */
export function readLayerBaselines(db: Database.Database): LayerBaselineRow[] {
  if (!hasTable(db, 'layer_null')) return [];
  return (db.prepare(`SELECT layer_id, units_sampled, mixed_sampled, mixed_expected FROM layer_null ORDER BY layer_id`).raw().all() as number[][])
    .map(([layerId, unitsSampled, mixedSampled, mixedExpected]) => ({ layerId, unitsSampled, mixedSampled, mixedExpected }));
}
