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

export interface RankNeighbour { layer: string; unit: number; rank: number; conceptCount: number; evidence: number; flagged: boolean }

/** The units ranked just above and just below position `rank`, and how many units are ranked in all. */
export function rankNeighbours(db: Database.Database, rank: number): { total: number; above: RankNeighbour | null; below: RankNeighbour | null } {
  const stmt = db.prepare(`SELECT l.name AS layer, s.unit, s.rank, s.concept_count AS conceptCount, s.evidence, s.dead, s.dense
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
