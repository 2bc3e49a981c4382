/**
 * Reads behind the unit page's evidence panel: which probes carry a label, the display data of chosen probes, and a
 * unit's neighbours in the stored ranking. Read-only.
 */
import type Database from 'better-sqlite3';
import { readUnitDrivers } from './drivers.ts';

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
  const stmt = db.prepare(`SELECT l.name AS layer, s.unit, s.rank, s.concept_count AS conceptCount, coalesce(s.concept_low, s.concept_count) AS conceptLow, s.evidence, s.dead, s.dense
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
 * shuffled-label baseline) as the unit page and the layers screen read them; the driver rows and baselines come
 * through core/store/drivers.ts, their repository. Every opened study is migrated, so the tables always exist;
 * a unit or layer scored without the joint model simply has no rows.
 */

/** Each scored unit's 90% concept-count interval, keyed `${layerId}:${unit}`. */
export function readConceptIntervals(db: Database.Database): Map<string, { low: number; high: number }> {
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

/** One unit's rows of the normalised driver table in stored order, split by kind. */
export function readJointExtras(db: Database.Database, layerId: number, unit: number): JointExtras {
  const out: JointExtras = { drivers: [], modulators: [], nested: [] };
  for (const r of readUnitDrivers(db, layerId, unit)) {
    const of = r.of ?? [];
    if (r.kind === 'driver') out.drivers.push({ labels: r.labels, share: r.share, shareLow: r.shareLow, shareHigh: r.shareHigh, sameAs: r.sameAs });
    else if (r.kind === 'modulator') out.modulators.push({ label: r.labels, of, auroc: r.auroc, q: r.q, effect: r.effect });
    else out.nested.push({ label: r.labels, within: of, auroc: r.auroc });
  }
  return out;
}
