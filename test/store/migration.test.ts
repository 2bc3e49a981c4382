/**
 * Migrating a study written by an earlier Skein: the dead/dense words of schema 2's JSON `flags` column become the typed
 * columns of schema 4 and read back the same through the scores repository. The schema-2 file is made with schema.ts's
 * own first two migrations, so it is exactly what that version wrote.
 */
import path from 'node:path';
import Database from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { migrations, SCHEMA_VERSION } from '../../core/store/schema.ts';
import { APP_ID, openStudyDb } from '../../core/store/study.ts';
import { readUnitScores } from '../../core/store/scores.ts';
import { tempDir } from '../support/fixtures.ts';

describe('schema 2 → 4 (typed flags in 3 → 4)', () => {
  it('turns the JSON flags into typed dead / dense columns, unit by unit', () => {
    const file = path.join(tempDir(), 'old.study');
    const old = new Database(file);
    old.exec(migrations[0]);
    old.exec(migrations[1]);
    old.pragma('user_version = 2');
    old.pragma(`application_id = ${APP_ID}`);
    old.exec(`INSERT INTO layer (id, name, op, node, position, dims_json, kind, units, pool) VALUES (1, 'h', 'Relu', 'h', 0, '[3]', 'dense', 3, 'none')`);
    const ins = old.prepare(`INSERT INTO unit_score (layer_id, unit, rank, concept_count, selectivity, evidence, flags, drivers, explanation, active_fraction, mean, max, top_threshold, top_probes, top_values)
      VALUES (1, ?, ?, 0, 0, 0, ?, '[]', NULL, 0, 0, 0, 0, x'', x'')`);
    ins.run(0, 0, '["dead"]');
    ins.run(1, 1, '["dense"]');
    ins.run(2, 2, '[]');
    old.close();

    const db = openStudyDb(file);
    try {
      expect(db.pragma('user_version', { simple: true })).toBe(SCHEMA_VERSION);
      expect(readUnitScores(db).map((s) => [s.unit, s.dead, s.dense])).toEqual([[0, true, false], [1, false, true], [2, false, false]]);
      const columns = (db.prepare(`SELECT name FROM pragma_table_info('unit_score')`).pluck().all() as string[]);
      expect(columns).not.toContain('flags');
    } finally {
      db.close();
    }
  });
});
