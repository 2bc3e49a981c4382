/**
 * The planted joint-model units (test/support/joint-fixtures.ts) as a real ONNX Gemm + Relu, scanned by onnxruntime
 * into a SQLite study and read back through the API as `skein rank --json` and the stored driver table give them.
 * Expected values come from the construction (weights set by hand).
 */
import path from 'node:path';
import Database from 'better-sqlite3';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, runScan } from '../../core/api/index.ts';
import type { RankRow } from '../../core/api/contract.ts';
import { JOINT_CASES, writeJointPlanted } from '../support/joint-fixtures.ts';
import { tempDir } from '../support/fixtures.ts';

describe('planted joint-model units through onnxruntime and a study file', () => {
  let rows: RankRow[];
  let study: string;

  beforeAll(async () => {
    const dir = tempDir();
    const { model, probes } = writeJointPlanted(dir);
    study = path.join(dir, 'joint.study');
    await runScan({ model, probes, study, batch: 500, layers: ['planted'] });
    rows = await createApi()['study.rank']({ study, layer: 'planted' });
  });

  JOINT_CASES.forEach((c, u) => {
    it(`${c.name}: ${c.drivers.join(', ') || 'no driver'}${c.formula ? `, formula ${c.formula}` : ''}`, () => {
      const r = rows.find((x) => x.unit === u)!;
      expect(r.flags).toEqual(c.flags ?? []);
      expect(r.drivers.map((d) => d.label).sort()).toEqual([...c.drivers].sort());
      expect(r.modulators.map((m) => m.label)).toEqual(c.modulators ?? []);
      expect(r.nested.map((x) => x.label)).toEqual(c.nested ?? []);
      expect(r.conceptCount).toBeGreaterThanOrEqual(c.count[0] - 1e-9);
      expect(r.conceptCount).toBeLessThanOrEqual(c.count[1] + 1e-9);
      if (c.formula) {
        expect(r.explanation!.formula.split(' | ').sort()).toEqual(c.formula.split(' | ').sort());
        expect(r.explanation!.iou).toBeGreaterThanOrEqual(c.minIou);
      }
    });
  });

  it('stores one normalised row per driver, modulator and nested label, and the shuffled-label baseline', () => {
    const db = new Database(study, { readonly: true });
    try {
      const kinds = db.prepare(`SELECT kind, count(*) AS n FROM unit_driver GROUP BY kind ORDER BY kind`).all();
      const expected = { driver: JOINT_CASES.reduce((t, c) => t + c.drivers.length, 0), modulator: 1, nested: 1 };
      expect(kinds).toEqual(Object.entries(expected).map(([kind, n]) => ({ kind, n })));
      const conj = db.prepare(`SELECT labels, share, n_alone, n_others, n_none FROM unit_driver WHERE unit = 0 AND kind = 'driver'`).get() as Record<string, unknown>;
      expect(JSON.parse(conj.labels as string)).toHaveLength(2); // a & b: one compound row
      expect(conj.share).toBe(1);
      const base = db.prepare(`SELECT units_sampled, mixed_real, mixed_expected FROM layer_null`).all() as Record<string, number>[];
      // the scan also keeps the logits layer
      const planted = base.find((b) => b.units_sampled === JOINT_CASES.length)!;
      expect(planted.mixed_real).toBe(3); // the three either-or units
      expect(planted.mixed_expected).toBe(0); // shuffled labels call nothing mixed here
    } finally {
      db.close();
    }
  });
});
