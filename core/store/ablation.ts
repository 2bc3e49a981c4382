/** The ablation tables (core/intervene's results): one repository, the only SQL about them. */
import type Database from 'better-sqlite3';
import { now } from './study.ts';

export interface AblationRunRow {
  id: number; key: string; modelFp: string; probesFp: string;
  layer: string; mode: string; value: number | null; sample: number | null; seed: number; probes: number;
  metric: string; floor: number; output: string; units: number; createdAt: string; updatedAt: string;
  /** Units with a stored cost. */
  done: number;
}

export interface AblationUnitRow {
  runId: number; unit: number; hurtCount: number; conceptsHurt: number;
  largestLabel: string | null; largestMean: number | null; reps: number; cost: string; at: string;
}

type RunInsert = Omit<AblationRunRow, 'id' | 'createdAt' | 'updatedAt' | 'done'>;

const RUN_COLUMNS = `r.id, r.key, r.model_fp AS modelFp, r.probes_fp AS probesFp, r.layer, r.mode, r.value, r.sample, r.seed,
  r.probes, r.metric, r.floor, r.output, r.units, r.created_at AS createdAt, r.updated_at AS updatedAt,
  (SELECT count(*) FROM ablation_unit u WHERE u.run_id = r.id) AS done`;

/** The run with this key, created when new. */
export function ensureAblationRun(db: Database.Database, run: RunInsert): AblationRunRow {
  const t = now();
  db.prepare(`INSERT INTO ablation_run (key, model_fp, probes_fp, layer, mode, value, sample, seed, probes, metric, floor, output, units, created_at, updated_at)
              VALUES (@key, @modelFp, @probesFp, @layer, @mode, @value, @sample, @seed, @probes, @metric, @floor, @output, @units, @t, @t)
              ON CONFLICT(key) DO UPDATE SET updated_at = @t`).run({ ...run, t });
  return db.prepare(`SELECT ${RUN_COLUMNS} FROM ablation_run r WHERE key = ?`).get(run.key) as AblationRunRow;
}

/** Runs of the study's current model and probe set, newest first; optionally of one layer. */
export function ablationRuns(db: Database.Database, fps: { modelFp: string; probesFp: string }, layer?: string): AblationRunRow[] {
  return db.prepare(`SELECT ${RUN_COLUMNS} FROM ablation_run r WHERE model_fp = ? AND probes_fp = ? AND (? IS NULL OR layer = ?)
                     ORDER BY updated_at DESC, id DESC`).all(fps.modelFp, fps.probesFp, layer ?? null, layer ?? null) as AblationRunRow[];
}

export function ablationRunByKey(db: Database.Database, key: string): AblationRunRow | null {
  return (db.prepare(`SELECT ${RUN_COLUMNS} FROM ablation_run r WHERE key = ?`).get(key) as AblationRunRow | undefined) ?? null;
}

export function doneAblationUnits(db: Database.Database, runId: number): Set<number> {
  return new Set(db.prepare(`SELECT unit FROM ablation_unit WHERE run_id = ?`).pluck().all(runId) as number[]);
}

/** Stores units' costs in one transaction (synchronous = FULL: committed units survive a crash; none half-written). */
export function writeAblationUnits(db: Database.Database, rows: Omit<AblationUnitRow, 'at'>[]): void {
  if (rows.length === 0) return;
  const insert = db.prepare(`INSERT OR REPLACE INTO ablation_unit (run_id, unit, hurt_count, concepts_hurt, largest_label, largest_mean, reps, cost, at)
                             VALUES (@runId, @unit, @hurtCount, @conceptsHurt, @largestLabel, @largestMean, @reps, @cost, @at)`);
  const touch = db.prepare(`UPDATE ablation_run SET updated_at = ? WHERE id = ?`);
  db.transaction(() => {
    const t = now();
    for (const row of rows) insert.run({ ...row, at: t });
    for (const id of new Set(rows.map((r) => r.runId))) touch.run(t, id);
  })();
}

const UNIT_COLUMNS = `run_id AS runId, unit, hurt_count AS hurtCount, concepts_hurt AS conceptsHurt, largest_label AS largestLabel,
  largest_mean AS largestMean, reps, cost, at`;

export function ablationUnit(db: Database.Database, runId: number, unit: number): AblationUnitRow | null {
  return (db.prepare(`SELECT ${UNIT_COLUMNS} FROM ablation_unit WHERE run_id = ? AND unit = ?`).get(runId, unit) as AblationUnitRow | undefined) ?? null;
}

/** Every stored unit of a run, in unit order. */
export function ablationUnits(db: Database.Database, runId: number): AblationUnitRow[] {
  return db.prepare(`SELECT ${UNIT_COLUMNS} FROM ablation_unit WHERE run_id = ? ORDER BY unit`).all(runId) as AblationUnitRow[];
}

/** The newest stored cost of one unit, across runs of the current model and probe set. */
export function latestAblationUnit(db: Database.Database, fps: { modelFp: string; probesFp: string }, layer: string, unit: number): { run: AblationRunRow; row: AblationUnitRow } | null {
  const hit = db.prepare(`SELECT u.run_id AS runId FROM ablation_unit u JOIN ablation_run r ON r.id = u.run_id
                          WHERE r.model_fp = ? AND r.probes_fp = ? AND r.layer = ? AND u.unit = ? ORDER BY u.at DESC LIMIT 1`)
    .get(fps.modelFp, fps.probesFp, layer, unit) as { runId: number } | undefined;
  if (!hit) return null;
  const run = db.prepare(`SELECT ${RUN_COLUMNS} FROM ablation_run r WHERE id = ?`).get(hit.runId) as AblationRunRow;
  return { run, row: ablationUnit(db, hit.runId, unit)! };
}

/**
 * For the roster: per layer, the concepts hurt and hurt count of each unit from that layer's newest run with the
 * most units done (one number per unit, never mixed across runs).
 */
export function rosterAblationCosts(db: Database.Database, fps: { modelFp: string; probesFp: string }): Map<string, { runId: number; mode: string; units: Map<number, { conceptsHurt: number; hurtCount: number }> }> {
  const out = new Map<string, { runId: number; mode: string; units: Map<number, { conceptsHurt: number; hurtCount: number }> }>();
  for (const run of ablationRuns(db, fps)) {
    const have = out.get(run.layer);
    if (have && (have.units.size >= run.done)) continue;
    const units = new Map<number, { conceptsHurt: number; hurtCount: number }>();
    for (const r of db.prepare(`SELECT unit, concepts_hurt AS conceptsHurt, hurt_count AS hurtCount FROM ablation_unit WHERE run_id = ?`).all(run.id) as { unit: number; conceptsHurt: number; hurtCount: number }[]) {
      units.set(r.unit, { conceptsHurt: r.conceptsHurt, hurtCount: r.hurtCount });
    }
    out.set(run.layer, { runId: run.id, mode: run.mode, units });
  }
  return out;
}

/** Forgets every stored ablation run and its unit costs (a benchmark's fresh start; users never need it). */
export function clearAblations(db: Database.Database): void {
  db.prepare(`DELETE FROM ablation_run`).run();
}
