/**
 * For screen tests of studies scored before the joint driver model wrote its extras: adds, by hand and in that
 * model's table layout (core/store/schema.ts), a concept-count interval for one unit and a shuffled-label baseline
 * for every layer. Does nothing to a study that already has them (the scoring wrote real ones).
 */
import Database from 'better-sqlite3';

export function ensureJointExtras(study: string, unitRank = 0): boolean {
  const db = new Database(study);
  try {
    const cols = db.prepare(`SELECT name FROM pragma_table_info('unit_score')`).pluck().all() as string[];
    const hasNull = !!db.prepare(`SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'layer_null'`).get();
    if (cols.includes('concept_low') && hasNull) return false;
    db.exec(`ALTER TABLE unit_score ADD COLUMN concept_low REAL; ALTER TABLE unit_score ADD COLUMN concept_high REAL;
      CREATE TABLE layer_null (layer_id INTEGER PRIMARY KEY, units_sampled INTEGER NOT NULL, mixed_sampled INTEGER NOT NULL,
      mixed_expected REAL NOT NULL, mixed_real INTEGER NOT NULL, mixed_at REAL NOT NULL, seed INTEGER NOT NULL);`);
    db.prepare(`UPDATE unit_score SET concept_low = concept_count * 0.9, concept_high = concept_count * 1.05 WHERE rank = ?`).run(unitRank);
    for (const [id, units] of db.prepare(`SELECT id, units FROM layer`).raw().all() as [number, number][]) {
      db.prepare(`INSERT INTO layer_null VALUES (?, ?, 1, ?, 0, 1.5, 1)`).run(id, Math.min(units, 8), units / Math.min(units, 8));
    }
    return true;
  } finally {
    db.close();
  }
}
